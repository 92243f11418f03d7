using System.Globalization;
using System.Security.Cryptography;
using System.Text.Json;
using Accountant.Ledger;
using Accountant.Search.Data;
using Accountant.Search.Trainers;
using Accountant.Statements;

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

    private static void CheckShareName(string share)
    {
        if (string.IsNullOrWhiteSpace(share) || share.Length > Bookkeeper.MaxNameLength || share.Any(char.IsControl))
        {
            throw AccountantException.BadArguments($"--share needs a short printable name (at most {Bookkeeper.MaxNameLength} characters), the same for every worker, such as 'churn-week-12'.");
        }
    }

    /// <summary>Refuses <c>--finish</c> before any data is read when there is no shared search to finish.</summary>
    private void CheckFinish(TabularSearchOptions options)
    {
        if (!options.Finish) return;
        if (options.Share is not null) CheckShareName(options.Share);
        if (options.Share is null)
        {
            throw AccountantException.BadArguments("--finish saves the selected model of a shared search; name the search with --share NAME (nothing was written).");
        }

        if (book.SharedPlans.FindPlan(options.Share) is null)
        {
            throw AccountantException.BadArguments($"the ledger has no shared search named '{options.Share}', so there is nothing to finish; give the name the workers were given with --share (nothing was written).");
        }
    }

    private TabularSearchOutcome RunShared(TabularSearchOptions options, Prepared prepared, IReadOnlyList<TrainerSpace> space, string holdoutName,
        IProgress<SearchProgress>? progress, Action<string>? note, CancellationToken cancel)
    {
        var share = options.Share!;
        CheckShareName(share);

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
        var existing = board.FindPlan(share);
        if (existing is not null) settings.Check(existing);
        SharedPlan plan;
        Holdout holdout;
        if (options.Finish)
        {
            // The plan exists (checked before the data was read), so its holdout does: this compares, and writes nothing.
            plan = existing!;
            holdout = Timings.Account(() => book.EnsureHoldout(holdoutName, prepared.ValidationExamples(), prepared.Metric, prepared.LossRange));
            var open = board.Tasks(plan).Count(t => t.State != TaskState.Done);
            if (open > 0)
            {
                throw AccountantException.BadArguments($"the shared search '{share}' still has {open} task(s) to do; run workers without --finish to do them (the last of them saves the selected model; nothing was written).");
            }
        }
        else
        {
            holdout = Timings.Account(() => book.EnsureHoldout(holdoutName, prepared.ValidationExamples(), prepared.Metric, prepared.LossRange));
            var schedule = new SharedSchedule(options, space, holdout.Metric.HigherIsBetter());
            plan = Timings.Account(() => board.OpenPlan(share, holdout.Name, settings.Json, schedule.FirstStage()));
            settings.Check(plan);
        }

        var fitted = Timings.Featurize(() => new Fitted(_ml, prepared));
        var runner = new Runner(book, holdout, fitted, options.Guard, share, options.Seed, Timings);
        var worker = $"{Environment.MachineName}-{Environment.ProcessId}-{Convert.ToHexStringLower(RandomNumberGenerator.GetBytes(3))}";
        var total = new SharedSchedule(options, space, holdout.Metric.HigherIsBetter()).Total;
        var gate = new object(); // the store's connection is used by one thread at a time: the worker, or a lease renewal
        SearchOutcome outcome;
        if (options.Finish)
        {
            outcome = runner.Outcome(false);
        }
        else
        {
            var schedule = new SharedSchedule(options, space, holdout.Metric.HigherIsBetter());
            note?.Invoke($"worker {worker} joined the shared search '{share}': {board.Tasks(plan).Count(t => t.State == TaskState.Done)} of {total} task(s) done");
            outcome = Work(runner, plan, worker, options.Lease, schedule, gate, progress, note, cancel);
        }

        var statement = Timings.Account(() => book.Statement(holdout.Name, options.Statement));
        var (modelPath, recordPath) = Paths(options, holdout.Name);
        var closing = outcome.Cancelled ? null : Close(runner, plan, worker, options, statement, modelPath, recordPath, gate, note, cancel);
        if (!outcome.Cancelled) runner.Report(progress, total, total, "done", board.BestScore(plan, holdout));
        Timings.Stop();
        var selectedBy = statement.Best is { } best ? board.Tasks(plan).FirstOrDefault(t => t.LookNumber == best.Number)?.CompletedBy : null;
        return Outcome(options, fitted, statement, outcome with { Cancelled = outcome.Cancelled || cancel.IsCancellationRequested }, modelPath, recordPath) with
        {
            ModelSaved = closing?.SavedHere ?? false, SharedWorker = worker, SelectedBy = selectedBy, SavedBy = closing?.Save?.Worker,
            SavedAt = closing?.Save?.Location, Selected = closing?.Model,
        };
    }

    /// <summary>Claims, trains and completes tasks until the plan has none left to claim and none in flight.</summary>
    private static SearchOutcome Work(Runner runner, SharedPlan plan, string worker, TimeSpan lease, SharedSchedule schedule, object gate,
        IProgress<SearchProgress>? progress, Action<string>? note, CancellationToken cancel)
    {
        var board = runner.Book.SharedPlans;
        var poll = Poll(lease);
        while (!cancel.IsCancellationRequested)
        {
            TaskClaim claim;
            double? best;
            lock (gate)
            {
                (claim, best) = runner.Timings.Account(() => (board.Claim(plan, worker, lease), board.BestScore(plan, runner.Holdout)));
            }

            if (claim.Task is not { } task)
            {
                if (claim.Finished) break;
                runner.Report(progress, claim.Done, schedule.Total, $"waiting for {claim.Claimed} task(s) in flight", best);
                cancel.WaitHandle.WaitOne(poll);
                continue;
            }

            if (task.Attempts > 1)
            {
                note?.Invoke($"took over task {task.Number} (attempt {task.Attempts}): an earlier worker's lease on it ran out before it finished");
            }

            var configuration = TrainerConfiguration.FromJson(task.Configuration);
            runner.Report(progress, claim.Done, schedule.Total, task.Stage is { } s ? $"{configuration.Trainer} at {s}" : configuration.Trainer, best);
            var trained = Renewing(gate, lease, () => board.Renew(plan, task.Number, worker, lease),
                () => runner.Train(configuration, task.Adaptive, task.Fraction, task.Stage));
            Look? look;
            lock (gate) look = runner.Timings.Account(() => runner.Book.CompleteTask(plan, task.Number, worker, trained.Input, schedule.Promote));
            if (look is null)
            {
                note?.Invoke($"task {task.Number} was completed by another worker while this one trained it (this worker's lease had run out); this worker's score was dropped, not recorded and not used, so the configuration counts once");
                continue;
            }

            runner.Keep(trained, look);
        }

        return runner.Outcome(cancel.IsCancellationRequested);
    }

    private static TimeSpan Poll(TimeSpan lease) => TimeSpan.FromMilliseconds(Math.Min(250, lease.TotalMilliseconds / 4));

    /// <summary>Runs <paramref name="work"/> while renewing a lease every third of it; no renewal runs after it returns.</summary>
    private static T Renewing<T>(object gate, TimeSpan lease, Func<bool> renew, Func<T> work)
    {
        var timer = new Timer(_ =>
        {
            lock (gate)
            {
                try
                {
                    renew();
                }
                catch (AccountantException)
                {
                    // A renewal that cannot be written lets the lease run out; completion still decides who counts.
                }
            }
        }, null, lease / 3, lease / 3);
        try
        {
            return work();
        }
        finally
        {
            using var stopped = new ManualResetEvent(false);
            if (timer.Dispose(stopped)) stopped.WaitOne();
        }
    }

    /// <summary>How the closing step ended for this worker: the step as stored, whether this worker saved, and the model it holds.</summary>
    private sealed record Closing(SaveClaim? Save, bool SavedHere, SelectedModel? Model);

    /// <summary>
    /// The closing step of a shared search: once no task is left, one worker saves the selected look's model and the record
    /// unseal reads, whichever worker that is. A worker that finds the plan finished claims the step (a lease, as a task's);
    /// the holder saves the model it kept when it trained the selected look itself, and otherwise retrains the selected
    /// look's configuration at its recorded stage on the same seeded split (training is reproducible from the seed), checks
    /// that the retrained model scores what the look recorded, saves, and marks the step done. The other workers wait until
    /// it is done, and take it over when the holder's lease runs out, so a worker that dies after its look was recorded and
    /// before the model was saved costs a retraining, never the model.
    /// </summary>
    private Closing? Close(Runner runner, SharedPlan plan, string worker, TabularSearchOptions options, Statement statement, string modelPath, string recordPath,
        object gate, Action<string>? note, CancellationToken cancel)
    {
        if (statement.Best is not { } best) return null;
        var board = book.SharedPlans;
        var task = board.Tasks(plan).FirstOrDefault(t => t.LookNumber == best.Number);
        if (task is null)
        {
            note?.Invoke($"the selected look #{best.Number} was not recorded by the shared search '{plan.Name}' (another search on holdout '{plan.Holdout}' recorded it), so no model is saved");
            return null;
        }

        string? waitingFor = null;
        while (!cancel.IsCancellationRequested)
        {
            SaveClaim claim;
            lock (gate) claim = board.ClaimSave(plan, worker, options.Lease);
            switch (claim.State)
            {
                case SaveState.Saved:
                    if (options.Finish) note?.Invoke($"the selected model was saved by worker {claim.Worker} (its record at {claim.Location}); nothing was left to finish");
                    return new Closing(claim, false, runner.Models.TryGetValue(best.Number, out var kept) ? new SelectedModel(_ml, runner.Fitted, kept, best.Number) : null);
                case SaveState.Held:
                    if (waitingFor != claim.Worker) note?.Invoke($"waiting for worker {claim.Worker} to save the selected model (look #{best.Number})");
                    waitingFor = claim.Worker;
                    cancel.WaitHandle.WaitOne(Poll(options.Lease));
                    continue;
                case SaveState.Claimed:
                    break;
                default:
                    return null; // a finished plan stays finished: a stage is promoted inside the completion that ends the one before
            }

            if (claim.Attempts > 1)
            {
                note?.Invoke($"took over saving the selected model (attempt {claim.Attempts}): the lease of the worker saving it ran out before it finished");
            }

            var model = runner.Models.GetValueOrDefault(best.Number);
            if (model is null)
            {
                note?.Invoke($"retraining the selected look #{best.Number} ({task.Stage ?? "all training rows"}) to save its model: the worker that trained it did not save it");
                var trained = Renewing(gate, options.Lease, () => board.RenewSave(plan, worker, options.Lease),
                    () => runner.Train(TrainerConfiguration.FromJson(task.Configuration), task.Adaptive, task.Fraction, task.Stage));
                if (!runner.Reproduces(trained, best))
                {
                    note?.Invoke($"the selected look #{best.Number} retrained here does not give the per-example losses it recorded (another ML.NET version or machine?), so its model is not saved; run 'accountant search --share {plan.Name} --finish' where the workers ran");
                    return null;
                }

                model = trained.Model;
            }

            Save(options, runner.Fitted, plan.Holdout, best, model, modelPath, recordPath);
            bool completed;
            lock (gate) completed = board.CompleteSave(plan, worker, best.Number, Path.GetFullPath(recordPath));
            if (!completed)
            {
                note?.Invoke("another worker took over saving the selected model while this one saved it (this worker's lease had run out); both wrote the same model");
            }

            SaveClaim? stored;
            lock (gate) stored = board.FindSave(plan);
            return new Closing(stored, completed, new SelectedModel(_ml, runner.Fitted, model, best.Number));
        }

        return null;
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
                ("maxTrainingRows", o.MaxTrainingRows.ToString(CultureInfo.InvariantCulture), "--max-training-rows"),
                ("maxValidationRows", o.MaxValidationRows.ToString(CultureInfo.InvariantCulture), "--max-validation-rows"),
                ("maxTestRows", o.MaxTestRows.ToString(CultureInfo.InvariantCulture), "--max-test-rows"),
                ("hashBits", o.HashBits.ToString(CultureInfo.InvariantCulture), "--hash-bits"),
                ("strategy", o.Strategy, "--strategy"),
                ("looks", o.Looks.ToString(CultureInfo.InvariantCulture), "--looks"),
                ("guard", o.Guard?.ToString(), "--guard"),
                ("space", JsonSerializer.Serialize(JsonDocument.Parse(SpaceFile.Write(space)).RootElement), "search space (--space)"),
            ]);
            var buffer = new MemoryStream();
            using (var w = new Utf8JsonWriter(buffer))
            {
                w.WriteStartObject();
                w.WriteNumber("v", 2);
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
