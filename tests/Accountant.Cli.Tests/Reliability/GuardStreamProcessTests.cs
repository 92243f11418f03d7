using System.Collections.Concurrent;
using System.Diagnostics;
using System.Globalization;
using Accountant.Ledger;
using Accountant.Tests.Support;
using Npgsql;
using Xunit.Abstractions;

namespace Accountant.Cli.Tests.Reliability;

public sealed class SqliteGuardStreamProcessTests(ITestOutputHelper output) : GuardStreamProcessContract(postgres: false, output);

public sealed class PostgresGuardStreamProcessTests(ITestOutputHelper output) : GuardStreamProcessContract(postgres: true, output);

/// <summary>
/// Eight writer processes share one Ladder stream (Blum &amp; Hardt 2015, arXiv 1502.04585, Alg. 1) and one Thresholdout
/// stream (Dwork et al. 2015, arXiv 1506.02629, Fig. 1) on one holdout, 50 adaptive looks each on each stream, one
/// transaction per look; one writer is killed with SIGKILL part-way and a new process finishes its looks. The released
/// values must be exactly those a single process gives when it records the same looks in chain order (so no writer released
/// against a stale state, and the kill lost none), every writer must have been told what the ledger recorded, and
/// <c>verify</c> must replay every release and recount the looks, adaptive looks and ln M_eff the statement uses.
/// </summary>
public abstract class GuardStreamProcessContract(bool postgres, ITestOutputHelper output) : IDisposable
{
    private const int Writers = 8, LooksEach = 100; // 50 on each stream, alternating
    private readonly CliHarness _cli = new();
    private string? _schema;

    public void Dispose()
    {
        if (_schema is not null) PostgresServer.DropSchema(_schema);
        _cli.Dispose();
        GC.SuppressFinalize(this);
    }

    private string NewLedger()
    {
        if (!postgres) return _cli.Ledger;
        _schema = "g_" + Guid.NewGuid().ToString("N")[..16];
        var b = new NpgsqlConnectionStringBuilder(PostgresServer.ConnectionString);
        return $"postgresql://{b.Username}@{b.Host}:{b.Port}/{b.Database}?schema={_schema}";
    }

    private sealed record Ack(int Number, string Told, int Writer, int I);

    private static IEnumerable<Ack> Acks(string stdout) =>
        stdout.Split('\n', StringSplitOptions.RemoveEmptyEntries).Select(line =>
        {
            var parts = line.Split(' ', 4);
            using var json = System.Text.Json.JsonDocument.Parse(parts[3]);
            return new Ack(int.Parse(parts[1], CultureInfo.InvariantCulture), parts[2], json.RootElement.GetProperty("writer").GetInt32(), json.RootElement.GetProperty("i").GetInt32());
        });

    [Fact]
    public async Task Writers_sharing_guard_streams_release_what_one_process_would_and_a_kill_loses_no_state()
    {
        var ledger = NewLedger();
        Assert.Equal(0, _cli.Run("init", "--ledger", ledger).Exit);
        Assert.Equal(0, _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(1000), "--ledger", ledger).Exit);
        var clock = Stopwatch.StartNew();

        var acks = new ConcurrentBag<Ack>();
        var failures = new ConcurrentBag<string>();
        void Collect(string who, Processes.Finished result, bool killed = false)
        {
            if (!killed && (result.Exit != 0 || result.Err.Length > 0)) failures.Add($"{who}: exit {result.Exit}: {result.Err}");
            foreach (var ack in Acks(result.Out)) acks.Add(ack);
        }

        string[] Args(int writer, int count, int first) =>
            [ledger, "validation", writer.ToString(CultureInfo.InvariantCulture), count.ToString(CultureInfo.InvariantCulture), "guarded", first.ToString(CultureInfo.InvariantCulture)];

        // The writers below block a thread each while their process runs, and the processes' output arrives on the thread
        // pool: enough threads that a loaded machine does not starve the readers (the kill below waits on what it reads).
        ThreadPool.GetMinThreads(out var workers, out var ports);
        ThreadPool.SetMinThreads(Math.Max(workers, 4 * Writers), ports);

        // Writer 0 (20 ms between looks) is killed once it has been told a few releases, at a moment within its next look
        // or pause; a new process then records the looks it had not been told.
        var victim = Task.Run(() =>
        {
            using var running = new Processes.Running(Processes.LoadWriter, Args(0, LooksEach, 0), new Dictionary<string, string?> { ["ACCOUNTANT_LOAD_PAUSE_MS"] = "20" });
            var waited = Stopwatch.StartNew();
            while (running.Out.Split('\n', StringSplitOptions.RemoveEmptyEntries).Length < 12 && !running.Process.HasExited && waited.Elapsed < TimeSpan.FromMinutes(2)) Thread.Sleep(2);
            Thread.Sleep(Random.Shared.Next(25));
            running.Kill();
            var told = Acks(running.Out).ToList();
            Collect("writer 0 (killed)", new Processes.Finished(running.Process.ExitCode, running.Out, ""), killed: true);
            Assert.True(told.Count < LooksEach, "the victim finished before it could be killed");
            // The kill may land after a look was written but before it was told: the ledger knows which ones it holds.
            int next;
            using (var book = Bookkeeper.Open(ledger))
            {
                var mine = book.Store.Looks(book.Holdout("validation")).Where(l => l.Configuration.StartsWith("{\"i\":", StringComparison.Ordinal) && l.Configuration.EndsWith(",\"writer\":0}", StringComparison.Ordinal)).ToList();
                next = mine.Count;
                Assert.True(next >= told.Count);
            }

            output.WriteLine($"writer 0 killed after {told.Count} acknowledged looks ({next} in the ledger); a new process records looks {next}–{LooksEach - 1}");
            Collect("writer 0 (restarted)", Processes.Run(Processes.LoadWriter, Args(0, LooksEach - next, next)));
        });
        var others = Enumerable.Range(1, Writers - 1).Select(w => Task.Run(() => Collect($"writer {w}", Processes.Run(Processes.LoadWriter, Args(w, LooksEach, 0))))).ToList();
        await Task.WhenAll([victim, .. others]);
        clock.Stop();
        Assert.Empty(failures);

        using var book = Bookkeeper.Open(ledger);
        var holdout = book.Holdout("validation");
        var looks = book.Store.Looks(holdout);
        const int total = Writers * LooksEach;
        Assert.Equal(Enumerable.Range(1, total), looks.Select(l => l.Number)); // every look once, gapless
        Assert.Equal(total, looks.Select(l => l.Configuration).Distinct().Count());
        var byNumber = looks.ToDictionary(l => l.Number);
        foreach (var ack in acks)
        {
            // Each writer was told exactly what the ledger recorded for its look.
            var look = byNumber[ack.Number];
            Assert.Equal($"{{\"i\":{ack.I},\"writer\":{ack.Writer}}}", look.Configuration);
            Assert.Equal(ack.Told, look.Release!.Value is { } v ? v.ToString("R", CultureInfo.InvariantCulture) : "refused");
        }

        // Both streams were used by every writer, interleaved, and their positions run 0, 1, 2, ... in chain order.
        foreach (var stream in new[] { GuardedLooks.LadderStream, GuardedLooks.ThresholdoutStream })
        {
            var on = looks.Where(l => l.Release!.Stream == stream).ToList();
            Assert.Equal(Enumerable.Range(0, total / 2), on.Select(l => l.Release!.Index!.Value));
        }

        // The single-process replay: the same looks, in chain order, recorded by one process on a fresh ledger whose
        // Thresholdout stream has the same seed.
        var seed = book.Store.FindGuardStream(holdout, GuardedLooks.ThresholdoutStream)!.Declared!.Seed!.Value;
        using (var replay = Bookkeeper.Create(Path.Combine(_cli.Folder, "replay.db")))
        {
            replay.GuardSeed = seed;
            replay.RegisterHoldout("validation", book.Store.Examples(holdout));
            var replayed = looks.Select(l => replay.RecordMany("validation", [new LookInput
            {
                Configuration = l.Configuration, Score = l.Score, Adaptive = l.Adaptive, Guard = Guards.GuardSpec.Parse(l.Release!.Guard),
                Stream = l.Release.Stream, TrainScore = l.Release.TrainScore,
            }])[0].Release).ToList();
            Assert.Equal(looks.Select(l => l.Release), replayed);
        }

        var answered = looks.Count(l => l.Release!.HoldoutAnswered && l.Release.Stream == GuardedLooks.ThresholdoutStream);
        var refused = looks.Count(l => l.Release!.Value is null);
        var steps = looks.Where(l => l.Release!.Stream == GuardedLooks.LadderStream).Select(l => l.Release!.Value).Distinct().Count();
        Assert.Equal(GuardedLooks.Thresholdout.Budget, answered); // the budget was spent, then the guard refused
        Assert.True(refused > 0 && steps > 3, $"{refused} refusals, {steps} Ladder values: the looks should exercise every branch");

        // verify replays every release and recounts what the statement counts.
        var report = book.Verify();
        Assert.True(report.Valid, report.Problem);
        var recount = Assert.Single(report.Recounts);
        var statement = book.Statement("validation");
        Assert.Equal((total, total, total), (recount.Looks, recount.AdaptiveLooks, recount.ReplayedReleases));
        Assert.Equal(0, recount.UncheckedReleases);
        Assert.Equal(2, recount.Streams);
        Assert.Equal(statement.Looks, recount.Looks);
        Assert.Equal(statement.AdaptiveLooks, recount.AdaptiveLooks);
        Assert.Equal(statement.LogEffectiveLooks, recount.LogEffectiveLooks, 9);
        output.WriteLine($"{(postgres ? "PostgreSQL" : "SQLite")}: {Writers} writer processes, {total} guarded looks on 2 streams in {clock.Elapsed.TotalSeconds:0.0} s; "
            + $"Thresholdout answered {answered} times from the holdout and refused {refused}; the Ladder released {steps} values; ln M_eff {recount.LogEffectiveLooks:0.0}");
    }
}
