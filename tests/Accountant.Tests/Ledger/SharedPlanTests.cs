using System.Collections.Concurrent;
using Accountant.Guards;
using Accountant.Ledger;
using Accountant.Tests.Support;

namespace Accountant.Tests.Ledger;

/// <summary>
/// What every backend of <see cref="ISharedPlanStore"/> must do, written once against the interface (a backend's test class
/// derives from this and says how to open a fresh ledger). The expected values are the interface's own promises: every
/// task is done exactly once, every look appears once with numbers 1…N, a stage is promoted once, a late completion writes
/// nothing; the chain is checked by recomputing it.
/// </summary>
public abstract class SharedPlanContract
{
    /// <summary>A book on the same fresh ledger, on a connection of its own, reading time from <paramref name="clock"/>.</summary>
    protected abstract Bookkeeper Open(TimeProvider clock);

    private readonly TestClock _clock = new();

    private static readonly TimeSpan Lease = TimeSpan.FromSeconds(2);

    private static List<PlannedTask> Tasks(int count, string prefix = "t") =>
        Enumerable.Range(1, count).Select(i => new PlannedTask($"{{\"trainer\":\"{prefix}\",\"i\":{i}}}", null, 1.0, false)).ToList();

    private (Bookkeeper Book, SharedPlan Plan) Start(int tasks, int holdoutSize = 100)
    {
        var book = Open(_clock);
        book.RegisterHoldout("validation", TempLedger.Examples(holdoutSize));
        return (book, book.SharedPlans.OpenPlan("plan", "validation", "{\"settings\":1}", Tasks(tasks)));
    }

    private static LookInput Scored(PlanTask task, double score) => new() { Configuration = task.Configuration, Score = score, Stage = task.Stage, Adaptive = task.Adaptive };

    [Fact]
    public void Workers_on_separate_connections_claim_every_task_exactly_once_and_record_each_look_once()
    {
        const int workers = 6, tasks = 60;
        var (first, plan) = Start(tasks);
        first.Dispose();
        var completed = new ConcurrentBag<(string Worker, int Task, int Look)>();
        // All workers start together, and each "trains" for a few milliseconds between claim and completion, as a real
        // worker does; otherwise the first thread to start can finish all 60 before the others have opened the ledger.
        var books = Enumerable.Range(0, workers).Select(_ => Open(_clock)).ToList();
        Together.Run(workers, w =>
        {
            using var book = books[w];
            var name = $"worker-{w}";
            while (book.SharedPlans.Claim(plan, name, TimeSpan.FromMinutes(5)) is { Task: { } task })
            {
                Thread.Sleep(5);
                var look = book.CompleteTask(plan, task.Number, name, Scored(task, task.Number % 10 / 10.0));
                Assert.NotNull(look); // nobody else can hold a task whose lease runs
                completed.Add((name, task.Number, look.Number));
            }
        });

        using var reader = Open(_clock);
        var stored = reader.SharedPlans.Tasks(plan);
        Assert.All(stored, t => Assert.Equal((TaskState.Done, 1), (t.State, t.Attempts)));
        Assert.Equal(Enumerable.Range(1, tasks), completed.Select(c => c.Task).Order()); // each task completed once
        var looks = reader.Store.Looks(reader.Holdout("validation"));
        Assert.Equal(Enumerable.Range(1, tasks), looks.Select(l => l.Number)); // gapless
        // Each look is the one its task names, and carries that task's configuration: every configuration counted once.
        Assert.All(stored, t => Assert.Equal(ConfigurationJson.Canonicalize(t.Configuration), looks[t.LookNumber!.Value - 1].Configuration));
        Assert.Equal(tasks, looks.Select(l => l.Configuration).Distinct().Count());
        Assert.True(completed.Select(c => c.Worker).Distinct().Count() > 1, "the work was shared");
        Assert.True(reader.Verify().Valid);
        var last = reader.SharedPlans.Claim(plan, "late", Lease);
        Assert.Null(last.Task);
        Assert.True(last.Finished);
    }

    [Fact]
    public void A_plan_opened_by_many_workers_at_once_is_created_once()
    {
        var book = Open(_clock);
        book.RegisterHoldout("validation", TempLedger.Examples(10));
        book.Dispose();
        var plans = new ConcurrentBag<SharedPlan>();
        var threads = Enumerable.Range(0, 8).Select(w => new Thread(() =>
        {
            using var b = Open(_clock);
            // Each worker offers its own settings; only the first to arrive is stored, and every worker is told which.
            plans.Add(b.SharedPlans.OpenPlan("plan", "validation", $"{{\"worker\":{w}}}", Tasks(5)));
        })).ToList();
        threads.ForEach(t => t.Start());
        threads.ForEach(t => t.Join());
        Assert.Single(plans.Select(p => (p.Key, p.Settings)).Distinct());
        using var reader = Open(_clock);
        Assert.Equal(5, reader.SharedPlans.Tasks(plans.First()).Count); // not 5 per worker
        Assert.Null(reader.SharedPlans.FindPlan("another"));
    }

    [Fact]
    public void An_expired_claim_is_taken_again_and_the_late_completion_writes_nothing()
    {
        var (book, plan) = Start(2);
        using var other = Open(_clock);
        using var _ = book;
        var a = book.SharedPlans.Claim(plan, "a", Lease).Task!;
        Assert.Equal((1, 1), (a.Number, a.Attempts));

        // While a's lease runs (and after a renewal), b is given the other task, then nothing.
        _clock.Advance(TimeSpan.FromSeconds(1.5));
        Assert.True(book.SharedPlans.Renew(plan, 1, "a", Lease));
        _clock.Advance(TimeSpan.FromSeconds(1.5));
        var b = other.SharedPlans.Claim(plan, "b", Lease);
        Assert.Equal(2, b.Task!.Number);
        var none = other.SharedPlans.Claim(plan, "b", Lease);
        Assert.Null(none.Task);
        Assert.Equal((0, 2, 0, false), (none.Pending, none.Claimed, none.Done, none.Finished));
        Assert.NotNull(other.CompleteTask(plan, 2, "b", Scored(b.Task, 0.3)));

        // a stops renewing (as a killed worker does): once its lease has run out, b takes task 1 over.
        _clock.Advance(TimeSpan.FromSeconds(2.5));
        var retaken = other.SharedPlans.Claim(plan, "b", Lease).Task!;
        Assert.Equal((1, 2, "b"), (retaken.Number, retaken.Attempts, retaken.Claimant));
        Assert.False(book.SharedPlans.Renew(plan, 1, "a", Lease)); // a's claim is gone
        var byB = other.CompleteTask(plan, 1, "b", Scored(retaken, 0.2));
        Assert.NotNull(byB);

        // a finishes late: its score is dropped, the chain is untouched, the task keeps b's look.
        var head = book.Store.ChainHead();
        Assert.Null(book.CompleteTask(plan, 1, "a", Scored(a, 0.1)));
        Assert.Equal(head, book.Store.ChainHead());
        var looks = book.Store.Looks(book.Holdout("validation"));
        Assert.Equal([0.3, 0.2], looks.Select(l => l.Score));
        var task = book.SharedPlans.Tasks(plan)[0];
        Assert.Equal((TaskState.Done, byB.Number, "b"), (task.State, task.LookNumber, task.CompletedBy));
        Assert.True(book.SharedPlans.Claim(plan, "a", Lease).Finished);
        Assert.True(book.Verify().Valid);
    }

    [Fact]
    public void A_slow_worker_whose_lease_ran_out_still_counts_when_it_finishes_first()
    {
        var (book, plan) = Start(1);
        using var _ = book;
        using var other = Open(_clock);
        var a = book.SharedPlans.Claim(plan, "a", Lease).Task!;
        _clock.Advance(TimeSpan.FromSeconds(3));
        var b = other.SharedPlans.Claim(plan, "b", Lease).Task!;
        Assert.Equal(a.Number, b.Number);
        Assert.NotNull(book.CompleteTask(plan, a.Number, "a", Scored(a, 0.25)));
        Assert.Null(other.CompleteTask(plan, b.Number, "b", Scored(b, 0.5)));
        Assert.Equal([0.25], book.Store.Looks(book.Holdout("validation")).Select(l => l.Score));
        Assert.Equal("a", book.SharedPlans.Tasks(plan)[0].CompletedBy);
    }

    [Fact]
    public void A_stage_is_promoted_exactly_once_by_the_completion_that_ends_it()
    {
        const int tasks = 12, workers = 4;
        var (first, plan) = Start(tasks);
        first.Dispose();
        var calls = new ConcurrentBag<(int Stage, List<FinishedTask> Finished)>();
        IReadOnlyList<PlannedTask> Promote(int stage, IReadOnlyList<FinishedTask> finished)
        {
            calls.Add((stage, finished.ToList()));
            // The two lowest scores go on, in the manner of successive halving.
            return stage > 0 ? [] : finished.OrderBy(f => f.Score).Take(2).Select(f => new PlannedTask(f.Configuration, "next", 1.0, true)).ToList();
        }

        var threads = Enumerable.Range(0, workers).Select(w => new Thread(() =>
        {
            using var book = Open(_clock);
            while (true)
            {
                var claim = book.SharedPlans.Claim(plan, $"w{w}", TimeSpan.FromMinutes(5));
                if (claim.Task is not { } task)
                {
                    if (claim.Finished) return;
                    Thread.Sleep(5);
                    continue;
                }

                Thread.Sleep(Random.Shared.Next(3)); // completions arrive in no fixed order
                book.CompleteTask(plan, task.Number, $"w{w}", Scored(task, (task.Number * 7 % tasks) / 100.0), Promote);
            }
        })).ToList();
        threads.ForEach(t => t.Start());
        threads.ForEach(t => t.Join());

        var byStage = calls.GroupBy(c => c.Stage).ToDictionary(g => g.Key, g => g.ToList());
        Assert.Single(byStage[0]);
        Assert.Single(byStage[1]);
        var stage0 = byStage[0][0].Finished;
        Assert.Equal(Enumerable.Range(1, tasks), stage0.Select(f => f.Number)); // every task of the stage, in order
        Assert.All(stage0, f => Assert.Equal((f.Number * 7 % tasks) / 100.0, f.Score));
        using var reader = Open(_clock);
        var stored = reader.SharedPlans.Tasks(plan);
        var promoted = stored.Where(t => t.StageIndex == 1).ToList();
        // Scores 7n mod 12 are lowest (0 and 0.01) for n = 12 and n = 7: reference arithmetic.
        Assert.Equal(
            [$"{{\"trainer\":\"t\",\"i\":12}}", $"{{\"trainer\":\"t\",\"i\":7}}"],
            promoted.Select(t => t.Configuration));
        Assert.Equal([13, 14], promoted.Select(t => t.Number));
        Assert.All(stored, t => Assert.Equal(TaskState.Done, t.State));
        var looks = reader.Store.Looks(reader.Holdout("validation"));
        Assert.Equal(Enumerable.Range(1, tasks + 2), looks.Select(l => l.Number));
        Assert.Equal(2, looks.Count(l => l.Adaptive && l.Stage == "next"));
        Assert.True(reader.Verify().Valid);
    }

    [Fact]
    public void A_failing_promotion_rolls_back_the_look_and_the_completion()
    {
        var (book, plan) = Start(1);
        using var _ = book;
        var task = book.SharedPlans.Claim(plan, "a", Lease).Task!;
        var head = book.Store.ChainHead();
        Assert.Throws<AccountantException>(() => book.CompleteTask(plan, task.Number, "a", Scored(task, 0.5),
            (_, _) => throw AccountantException.BadInput("refused by the test")));
        Assert.Equal(head, book.Store.ChainHead());
        Assert.Equal(TaskState.Claimed, book.SharedPlans.Tasks(plan)[0].State);
        Assert.Empty(book.Store.Looks(book.Holdout("validation")));
        // A bad look is refused before anything is written, too.
        Assert.Throws<AccountantException>(() => book.CompleteTask(plan, task.Number, "a", Scored(task, double.NaN)));
        Assert.Equal(head, book.Store.ChainHead());
        Assert.NotNull(book.CompleteTask(plan, task.Number, "a", Scored(task, 0.5)));
    }

    [Fact]
    public void Guarded_looks_of_concurrent_workers_are_released_in_chain_order()
    {
        const int tasks = 24, n = 100;
        var (first, plan) = Start(tasks, n);
        first.Dispose();
        var guard = GuardSpec.Parse("ladder:0.05");
        var threads = Enumerable.Range(0, 4).Select(w => new Thread(() =>
        {
            using var book = Open(_clock);
            while (book.SharedPlans.Claim(plan, $"w{w}", TimeSpan.FromMinutes(5)) is { Task: { } task })
            {
                var score = (50 - task.Number * 37 % 50) / 100.0;
                book.CompleteTask(plan, task.Number, $"w{w}", Scored(task, score) with { Guard = guard, Adaptive = true });
            }
        })).ToList();
        threads.ForEach(t => t.Start());
        threads.ForEach(t => t.Join());

        // Reference: the Ladder applied one look after another in the chain's order (Blum & Hardt 2015, Alg. 1) must give
        // exactly the values recorded; a release computed from a stale state would differ somewhere in the sequence.
        using var reader = Open(_clock);
        var holdout = reader.Holdout("validation");
        var state = GuardState.Empty;
        foreach (var look in reader.Store.Looks(holdout))
        {
            var expected = Guard.Apply(guard, state, look.Score, ValueSpace.ZeroOne(n), higherIsBetter: false);
            Assert.Equal(expected.Value, look.Release!.Value);
            state = new GuardState(state.Releases + 1, state.HoldoutAnswers + (expected.HoldoutAnswered ? 1 : 0), expected.Value ?? state.LastReleased);
        }

        Assert.Equal(tasks, reader.Store.Looks(holdout).Count);
    }

    [Fact]
    public void The_closing_step_is_given_to_one_worker_once_the_plan_is_finished_and_taken_over_when_its_lease_runs_out()
    {
        const int workers = 5;
        var (book, plan) = Start(2);
        using var _ = book;
        var head = book.Store.ChainHead();
        Assert.Null(book.SharedPlans.FindSave(plan));
        var early = book.SharedPlans.ClaimSave(plan, "a", Lease);
        Assert.Equal((SaveState.Unfinished, 2), (early.State, early.Remaining)); // tasks remain: nothing to save yet
        Assert.Null(book.SharedPlans.FindSave(plan));
        while (book.SharedPlans.Claim(plan, "a", Lease) is { Task: { } task }) book.CompleteTask(plan, task.Number, "a", Scored(task, 0.4));
        head = book.Store.ChainHead();

        // Workers arriving together at the finished plan: exactly one is given the step, the others see it held.
        var claims = new ConcurrentBag<SaveClaim>();
        var books = Enumerable.Range(0, workers).Select(_ => Open(_clock)).ToList();
        Together.Run(workers, w =>
        {
            using var worker = books[w];
            claims.Add(worker.SharedPlans.ClaimSave(plan, $"w{w}", Lease));
        });
        var holder = Assert.Single(claims, c => c.State == SaveState.Claimed);
        Assert.All(claims.Where(c => c != holder), c => Assert.Equal((SaveState.Held, holder.Worker), (c.State, c.Worker)));
        Assert.Equal(1, holder.Attempts);

        // While the holder renews, nobody else gets it; once it stops (as a killed worker does), the next claimant takes it over.
        _clock.Advance(TimeSpan.FromSeconds(1.5));
        Assert.True(book.SharedPlans.RenewSave(plan, holder.Worker!, Lease));
        _clock.Advance(TimeSpan.FromSeconds(1.5));
        Assert.Equal(SaveState.Held, book.SharedPlans.ClaimSave(plan, "late", Lease).State);
        _clock.Advance(TimeSpan.FromSeconds(2.5));
        var retaken = book.SharedPlans.ClaimSave(plan, "late", Lease);
        Assert.Equal((SaveState.Claimed, "late", 2), (retaken.State, retaken.Worker, retaken.Attempts));
        Assert.False(book.SharedPlans.RenewSave(plan, holder.Worker!, Lease));
        Assert.False(book.SharedPlans.CompleteSave(plan, holder.Worker!, 1, "/old/record.json")); // the old holder's step is gone
        Assert.True(book.SharedPlans.CompleteSave(plan, "late", 1, "/here/record.json"));
        Assert.False(book.SharedPlans.CompleteSave(plan, "late", 1, "/here/record.json")); // done once

        // Done: every later claimant is told who saved which look and where, and nothing of it is in the chain.
        var saved = book.SharedPlans.ClaimSave(plan, "later", Lease);
        Assert.Equal((SaveState.Saved, "late", 1, "/here/record.json"), (saved.State, saved.Worker, saved.Look, saved.Location));
        Assert.Equal(saved, book.SharedPlans.FindSave(plan));
        Assert.Equal(head, book.Store.ChainHead());
        Assert.True(book.Verify().Valid);
    }

    [Fact]
    public void The_best_score_of_a_plan_is_that_of_its_done_tasks_looks_only()
    {
        var (book, plan) = Start(3);
        using var _ = book;
        var holdout = book.Holdout("validation");
        Assert.Null(book.SharedPlans.BestScore(plan, holdout));
        // A look on the same holdout that no task of the plan made does not count.
        book.Record("validation", "{\"trainer\":\"outside\"}", 0.05);
        var scores = new[] { 0.30, 0.20, 0.25 };
        while (book.SharedPlans.Claim(plan, "a", Lease) is { Task: { } task }) book.CompleteTask(plan, task.Number, "a", Scored(task, scores[task.Number - 1]));
        Assert.Equal(0.20, book.SharedPlans.BestScore(plan, holdout));

        // On a holdout where higher is better, the highest.
        book.RegisterHoldout("accuracy", TempLedger.Examples(100), Metric.Accuracy);
        var other = book.SharedPlans.OpenPlan("accuracy-plan", "accuracy", "{}", Tasks(2, "u"));
        var accuracy = book.Holdout("accuracy");
        while (book.SharedPlans.Claim(other, "a", Lease) is { Task: { } task }) book.CompleteTask(other, task.Number, "a", Scored(task, 0.6 + task.Number / 10.0));
        Assert.Equal(0.8, book.SharedPlans.BestScore(other, accuracy)!.Value, 12);
    }

    /// <summary>A clock the test moves by hand; shared by every connection of a test, as one machine's clock is.</summary>
    private sealed class TestClock : TimeProvider
    {
        private long _ticks = new DateTimeOffset(2026, 3, 4, 5, 6, 7, TimeSpan.Zero).UtcTicks;

        public void Advance(TimeSpan by) => Interlocked.Add(ref _ticks, by.Ticks);

        public override DateTimeOffset GetUtcNow() => new(Interlocked.Read(ref _ticks), TimeSpan.Zero);
    }
}

public sealed class SqliteSharedPlanTests : SharedPlanContract, IDisposable
{
    private readonly TempLedger _temp = new();

    protected override Bookkeeper Open(TimeProvider clock) =>
        File.Exists(_temp.Path) ? Bookkeeper.Open(_temp.Path, clock) : Bookkeeper.Create(_temp.Path, clock);

    public void Dispose() => _temp.Dispose();

    [Fact]
    public void The_coordination_tables_stay_out_of_the_chain_and_a_ledger_without_them_is_read_only_when_asked()
    {
        using var book = Open(TimeProvider.System);
        book.RegisterHoldout("validation", TempLedger.Examples(10));
        var head = book.Store.ChainHead();
        Assert.Null(book.SharedPlans.FindPlan("plan")); // no tables yet, and none made by asking
        var plan = book.SharedPlans.OpenPlan("plan", "validation", "{}", [new PlannedTask("{\"trainer\":\"x\"}", null, 1, false)]);
        var task = book.SharedPlans.Claim(plan, "a", TimeSpan.FromMinutes(1)).Task!;
        Assert.Equal(head, book.Store.ChainHead()); // plans, tasks and claims are not chain entries
        book.CompleteTask(plan, task.Number, "a", new LookInput { Configuration = task.Configuration, Score = 0.5 });
        var report = book.Verify();
        Assert.True(report.Valid);
        Assert.Equal(2, report.Entries); // the holdout and the one look
    }

    [Fact]
    public void A_ledger_whose_plan_tables_predate_the_closing_step_gets_its_table_when_a_worker_first_claims_it()
    {
        using var book = Open(TimeProvider.System);
        book.RegisterHoldout("validation", TempLedger.Examples(10));
        var plan = book.SharedPlans.OpenPlan("plan", "validation", "{}", [new PlannedTask("{\"trainer\":\"x\"}", null, 1, false)]);
        var task = book.SharedPlans.Claim(plan, "a", TimeSpan.FromMinutes(1)).Task!;
        book.CompleteTask(plan, task.Number, "a", new LookInput { Configuration = task.Configuration, Score = 0.5 });
        // What a ledger made before the closing step existed holds: the plan tables without shared_saves.
        using (var connection = new Microsoft.Data.Sqlite.SqliteConnection($"Data Source={_temp.Path};Pooling=False"))
        {
            connection.Open();
            using var drop = connection.CreateCommand();
            drop.CommandText = "DROP TABLE shared_saves;";
            drop.ExecuteNonQuery();
        }

        using var reopened = Bookkeeper.Open(_temp.Path);
        Assert.Null(reopened.SharedPlans.FindSave(plan));
        Assert.Equal(SaveState.Claimed, reopened.SharedPlans.ClaimSave(plan, "b", TimeSpan.FromMinutes(1)).State);
        Assert.True(reopened.SharedPlans.CompleteSave(plan, "b", 1, "/record.json"));
        Assert.True(reopened.Verify().Valid);
    }
}

/// <summary>The same contract on the PostgreSQL backend (a schema of its own on the tests' throwaway server).</summary>
public sealed class PostgresSharedPlanTests : SharedPlanContract, IDisposable
{
    private readonly TempLedger _temp = new(Backend.Postgres);
    private bool _created;

    protected override Bookkeeper Open(TimeProvider clock)
    {
        lock (_temp)
        {
            if (_created) return Bookkeeper.Open(_temp.Location, clock);
            _created = true;
            return Bookkeeper.Create(_temp.Location, clock);
        }
    }

    public void Dispose() => _temp.Dispose();
}
