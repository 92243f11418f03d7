using System.Globalization;
using System.Security.Cryptography;
using System.Text.Json;
using Accountant.Ledger;
using Accountant.Search.Data;
using Accountant.Search.Trainers;

namespace Accountant.Search;

/// <summary>
/// Shared searches: several processes, on one machine or many, work through one plan stored in the ledger
/// (<see cref="ISharedPlanStore"/>). The first worker to arrive writes the plan: the settings every worker must share and
/// the first stage's configurations, all derived from the seed, so every worker would have written the same. Each worker
/// then claims a task, trains it while renewing its lease, and completes it with its look in one transaction; halving's
/// next rung is added by the completion that finishes a rung. A worker that dies leaves its claim to expire and be taken
/// again; an abandoned claim was never scored and is not a look. When nothing is left to claim or in flight, every worker
/// prints the statement, which the ledger alone determines, so it is the same whichever worker prints it.
/// </summary>
/// <remarks>
/// Refine is refused: each of its configurations depends on every earlier released value, so there is never more than
/// one task to hand out, and sharing it would only add waiting.
/// </remarks>
public sealed partial class TabularSearch
{
    /// <summary>The shortest lease accepted: renewals every third of it must fit between writes of other workers.</summary>
    public static readonly TimeSpan MinimumLease = TimeSpan.FromSeconds(1);

    private TabularSearchOutcome RunShared(TabularSearchOptions options, Prepared prepared, IReadOnlyList<TrainerSpace> space, string holdoutName,
        IProgress<SearchProgress>? progress, Action<string>? note, CancellationToken cancel)
    {
        var share = options.Share!;
        if (string.IsNullOrWhiteSpace(share) || share.Length > Bookkeeper.MaxNameLength || share.Any(char.IsControl))
        {
            throw AccountantException.BadArguments($"--share needs a short printable name (at most {Bookkeeper.MaxNameLength} characters), the same for every worker, such as 'churn-week-12'.");
        }

        if (options.Strategy == "refine")
        {
            throw AccountantException.BadArguments("refine chooses each configuration from every earlier look, so its work cannot be shared out; use --strategy random, grid or halving with --share, or run refine without --share.");
        }

        if (options.Lease < MinimumLease)
        {
            throw AccountantException.BadArguments($"--lease must be at least {MinimumLease.TotalSeconds:0} s, for example 60s or 5m.");
        }

        var board = book.SharedPlans;
        var settings = PlanSettings.Of(options, prepared.Task, space, holdoutName);
        // Checked before the holdout is registered, so a worker with other settings writes nothing.
        if (board.FindPlan(share) is { } existing) settings.Check(existing);
        var holdout = book.EnsureHoldout(holdoutName, prepared.ValidationExamples(), prepared.Metric, prepared.LossRange);
        var schedule = new SharedSchedule(options, space, holdout.Metric.HigherIsBetter());
        var plan = board.OpenPlan(share, holdout.Name, settings.Json, schedule.FirstStage());
        settings.Check(plan);

        var views = new Views(_ml, prepared);
        var runner = new Runner(_ml, book, holdout, prepared, views, options.Guard, share);
        var worker = $"{Environment.MachineName}-{Environment.ProcessId}-{Convert.ToHexStringLower(RandomNumberGenerator.GetBytes(3))}";
        var before = board.Tasks(plan);
        note?.Invoke($"worker {worker} joined the shared search '{share}': {before.Count(t => t.State == TaskState.Done)} of {schedule.Total} task(s) done");
        var outcome = Work(runner, plan, worker, options.Lease, schedule, progress, note, cancel);
        var finished = Finish(options, prepared, views, runner, holdout, outcome);
        var selectedBy = finished.Statement.Best is { } best ? board.Tasks(plan).FirstOrDefault(t => t.LookNumber == best.Number)?.CompletedBy : null;
        return finished with { SharedWorker = worker, SelectedBy = selectedBy };
    }

    /// <summary>Claims, trains and completes tasks until the plan has none left to claim and none in flight.</summary>
    private static SearchOutcome Work(Runner runner, SharedPlan plan, string worker, TimeSpan lease, SharedSchedule schedule,
        IProgress<SearchProgress>? progress, Action<string>? note, CancellationToken cancel)
    {
        var board = runner.Book.SharedPlans;
        var gate = new object(); // the store's connection is used by one thread at a time: this loop, or the lease renewal
        var poll = TimeSpan.FromMilliseconds(Math.Min(250, lease.TotalMilliseconds / 4));
        while (!cancel.IsCancellationRequested)
        {
            TaskClaim claim;
            lock (gate) claim = board.Claim(plan, worker, lease);
            if (claim.Task is not { } task)
            {
                if (claim.Finished) break;
                runner.Report(progress, claim.Done, schedule.Total, $"waiting for {claim.Claimed} task(s) in flight");
                cancel.WaitHandle.WaitOne(poll);
                continue;
            }

            if (task.Attempts > 1)
            {
                note?.Invoke($"took over task {task.Number} (attempt {task.Attempts}): an earlier worker's lease on it ran out before it finished");
            }

            var configuration = TrainerConfiguration.FromJson(task.Configuration);
            runner.Report(progress, claim.Done, schedule.Total, task.Stage is { } s ? $"{configuration.Trainer} at {s}" : configuration.Trainer);
            Runner.Trained trained;
            var renew = new Timer(_ =>
            {
                lock (gate)
                {
                    try
                    {
                        board.Renew(plan, task.Number, worker, lease);
                    }
                    catch (AccountantException)
                    {
                        // A renewal that cannot be written lets the lease run out; completion still decides who counts.
                    }
                }
            }, null, lease / 3, lease / 3);
            try
            {
                trained = runner.Train(configuration, task.Adaptive, task.Fraction, task.Stage);
            }
            finally
            {
                using var stopped = new ManualResetEvent(false);
                if (renew.Dispose(stopped)) stopped.WaitOne(); // no renewal may run after this point
            }

            Look? look;
            lock (gate) look = runner.Book.CompleteTask(plan, task.Number, worker, trained.Input, schedule.Promote);
            if (look is null)
            {
                note?.Invoke($"task {task.Number} was completed by another worker while this one trained it (this worker's lease had run out); this worker's score was dropped, not recorded and not used, so the configuration counts once");
                continue;
            }

            runner.Keep(trained, look);
        }

        if (cancel.IsCancellationRequested) return runner.Outcome(true);
        runner.Report(progress, schedule.Total, schedule.Total, "done");
        return runner.Outcome(false);
    }

    /// <summary>The tasks of a shared plan: fixed lists for random and grid, rung by rung for halving.</summary>
    private sealed class SharedSchedule(TabularSearchOptions options, IReadOnlyList<TrainerSpace> space, bool higherIsBetter)
    {
        private readonly int _rungs = Halving.Rungs(options.Looks);

        public int Total => options.Strategy switch
        {
            "halving" => Halving.Sizes(options.Looks).Sum(),
            "grid" => Math.Min(options.Looks, new GridStrategy(space, options.Looks).Count),
            _ => options.Looks,
        };

        public IReadOnlyList<PlannedTask> FirstStage()
        {
            switch (options.Strategy)
            {
                case "halving":
                    var fraction = Halving.Fraction(0, _rungs);
                    return BinaryTrainers.RandomConfigurations(space, options.Looks, options.Seed)
                        .Select(c => new PlannedTask(c.ToJson(), Halving.Stage(fraction), fraction, Adaptive: false)).ToList();
                case "grid":
                    var grid = new GridStrategy(space, options.Looks);
                    return Enumerable.Range(0, Total).Select(i => new PlannedTask(grid.Next(i, []).Item1.ToJson(), null, 1.0, false)).ToList();
                case "random":
                    return BinaryTrainers.RandomConfigurations(space, options.Looks, options.Seed)
                        .Select(c => new PlannedTask(c.ToJson(), null, 1.0, false)).ToList();
                default:
                    throw AccountantException.BadArguments($"unknown strategy '{options.Strategy}'; use random, grid or halving with --share.");
            }
        }

        /// <summary>Halving's promotion, called by the store inside the completion that finishes a rung; null for fixed plans.</summary>
        public Func<int, IReadOnlyList<FinishedTask>, IReadOnlyList<PlannedTask>>? Promote => options.Strategy != "halving" ? null : (rung, finished) =>
        {
            if (rung >= _rungs) return [];
            var fraction = Halving.Fraction(rung + 1, _rungs);
            return Halving.Keep<string>(finished.Select(t => (t.Configuration, t.Told)).ToList(), higherIsBetter)
                .Select(c => new PlannedTask(c, Halving.Stage(fraction), fraction, Adaptive: true)).ToList();
        };
    }

    /// <summary>
    /// The settings every worker of a shared plan must share, as one JSON object of named text fields. Data files enter by
    /// the SHA-256 of their bytes, so workers on other machines may keep their copy anywhere.
    /// </summary>
    private sealed class PlanSettings
    {
        private readonly List<(string Key, string? Value, string Option)> _fields = [];
        private readonly string _share;

        private PlanSettings(string share) => _share = share;

        public string Json { get; private set; } = "";

        public static PlanSettings Of(TabularSearchOptions o, TaskKind task, IReadOnlyList<TrainerSpace> space, string holdout)
        {
            var s = new PlanSettings(o.Share!);
            string Number(double x) => x.ToString("R", CultureInfo.InvariantCulture);
            s._fields.AddRange(
            [
                ("holdout", holdout, "holdout name (--name)"),
                ("data", FileDigest(o.DataPath), "data file"),
                ("validationData", o.ValidationPath is null ? null : FileDigest(o.ValidationPath), "--validation file"),
                ("testData", o.TestPath is null ? null : FileDigest(o.TestPath), "--test file"),
                ("label", o.Label, "--label"),
                ("task", task.ToString().ToLowerInvariant(), "task (--task)"),
                ("ignore", string.Join(",", o.Ignore), "--ignore"),
                ("idColumn", o.IdColumn, "--id-column"),
                ("seed", o.Seed.ToString(CultureInfo.InvariantCulture), "--seed"),
                ("validationFraction", Number(o.ValidationFraction), "--validation-fraction"),
                ("testFraction", Number(o.TestFraction), "--test-fraction"),
                ("strategy", o.Strategy, "--strategy"),
                ("looks", o.Looks.ToString(CultureInfo.InvariantCulture), "--looks"),
                ("guard", o.Guard?.ToString(), "--guard"),
                ("space", JsonSerializer.Serialize(JsonDocument.Parse(SpaceFile.Write(space)).RootElement), "search space (--space)"),
            ]);
            var buffer = new MemoryStream();
            using (var w = new Utf8JsonWriter(buffer))
            {
                w.WriteStartObject();
                w.WriteNumber("v", 1);
                foreach (var (key, value, _) in s._fields) w.WriteString(key, value);
                w.WriteEndObject();
            }

            s.Json = System.Text.Encoding.UTF8.GetString(buffer.ToArray());
            return s;
        }

        private static string FileDigest(string path)
        {
            try
            {
                using var stream = File.OpenRead(path);
                return Convert.ToHexStringLower(SHA256.HashData(stream));
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                throw AccountantException.BadInput($"'{path}' cannot be read ({e.Message.TrimEnd('.')}); check the path.");
            }
        }

        /// <summary>Throws, naming the first difference, unless the stored plan has exactly these settings.</summary>
        public void Check(SharedPlan plan)
        {
            if (plan.Settings == Json) return;
            Dictionary<string, string?> stored;
            try
            {
                stored = JsonSerializer.Deserialize<Dictionary<string, JsonElement>>(plan.Settings)!
                    .ToDictionary(p => p.Key, p => p.Value.ValueKind == JsonValueKind.String ? p.Value.GetString() : p.Value.ValueKind == JsonValueKind.Null ? null : p.Value.GetRawText());
            }
            catch (JsonException)
            {
                throw new AccountantException(ErrorKind.Integrity, $"the shared search '{_share}' has damaged settings in the ledger; start a new one under another --share name.");
            }

            const string Fix = "give every worker the same settings, or start another shared search with another --share name (nothing was written).";
            foreach (var (key, value, option) in _fields)
            {
                var theirs = stored.GetValueOrDefault(key);
                if (theirs == value) continue;
                if (key is "data" or "validationData" or "testData")
                {
                    throw AccountantException.BadInput($"this worker's {option} is not the one the shared search '{_share}' was planned with (SHA-256 {Short(value)} here, {Short(theirs)} in the plan); {Fix}");
                }

                if (key == "space")
                {
                    throw AccountantException.BadArguments($"this worker's search space differs from the one the shared search '{_share}' was planned with; {Fix}");
                }

                throw AccountantException.BadArguments($"this worker's {option} is {Shown(value)} but the shared search '{_share}' was planned with {Shown(theirs)}; {Fix}");
            }

            throw AccountantException.BadArguments($"the shared search '{_share}' was planned by another version of the accountant; {Fix}");
        }

        private static string Short(string? digest) => digest is null ? "(none)" : digest[..Math.Min(12, digest.Length)];

        private static string Shown(string? value) => value is null ? "(none)" : value.Length == 0 ? "(empty)" : $"'{value}'";
    }
}
