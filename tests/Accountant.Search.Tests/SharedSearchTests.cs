using System.Collections.Concurrent;
using System.Text.Json;
using Accountant.Ledger;
using Accountant.Search.Data;
using Accountant.Search.Trainers;
using Accountant.Statements;
using Accountant.Tests.Support;
using Xunit.Abstractions;

namespace Accountant.Search.Tests;

/// <summary>
/// Shared searches run by several workers in one test process (each with its own ledger connection and ML.NET context).
/// The references are the search's own definitions: the first rung is the seed's random configurations, and each later
/// rung is the best third of the one before by the recorded scores (successive halving, Jamieson &amp; Talwalkar 2016).
/// </summary>
public sealed class SharedSearchTests(ITestOutputHelper output) : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("accountant-shared-").FullName;

    public void Dispose()
    {
        try { Directory.Delete(_folder, true); } catch (IOException) { }
    }

    private string Ledger => Path.Combine(_folder, "ledger.db");

    /// <summary>
    /// Small trees only, so that the thirteen looks of a halving plan train in seconds. Written once, before any worker
    /// starts: workers running in parallel must not rewrite a file another one is reading.
    /// </summary>
    private string QuickSpace() => _space ??= WriteQuickSpace();

    private string? _space;

    private string WriteQuickSpace()
    {
        var path = Path.Combine(_folder, "space.json");
        File.WriteAllText(path, """{"trainers":[{"trainer":"fasttree","parameters":{"trees":{"scale":"integer","low":10,"high":20},"leaves":{"scale":"integer","low":2,"high":8}}}]}""");
        return path;
    }

    private TabularSearchOptions Options(string data) => new()
    {
        DataPath = data, Label = "sold_out", IdColumn = "day", Seed = 4, Strategy = "halving", Looks = 9, Share = "team", Lease = TimeSpan.FromSeconds(2),
        SpacePath = QuickSpace(),
    };

    /// <summary>What a reader of the statement sees, as text: identical text means an identical statement.</summary>
    private static string Shown(Statement s) => JsonSerializer.Serialize(new
    {
        s.Looks, s.AdaptiveLooks, s.LogEffectiveLooks, Best = s.Best?.Number, BestScore = s.Best?.Score, s.ChainHead,
        Bounds = s.Bounds.Select(b => $"{b.Method} {b.Bound:R} {b.Margin:R}"), s.Budget.MaxLooks, Warnings = s.Warnings.Select(w => w.Code),
    });

    [Fact]
    public void Three_workers_share_a_halving_plan_train_each_task_once_promote_each_rung_once_and_state_the_same()
    {
        var data = BakeryFile.Write(_folder, 300);
        Bookkeeper.Create(Ledger).Dispose();
        var outcomes = new ConcurrentBag<(TabularSearchOutcome Outcome, List<SearchProgress> Reports)>();
        var options = Options(data); // one set of settings, its space file written before any worker starts
        Together.Run(3, _ =>
        {
            using var book = Bookkeeper.Open(Ledger);
            var reports = new Reports();
            outcomes.Add((new TabularSearch(book, Ledger).Run(options, reports), reports.All));
        });
        Assert.Equal(3, outcomes.Count);

        // The statement is the same whichever worker printed it.
        Assert.Single(outcomes.Select(o => Shown(o.Outcome.Statement)).Distinct());
        // Exactly one worker saves the selected model; every worker names that one, and the one whose look was selected.
        var saver = Assert.Single(outcomes, o => o.Outcome.ModelSaved).Outcome;
        Assert.All(outcomes, o => Assert.Equal((saver.SharedWorker, saver.RecordPath), (o.Outcome.SavedBy, o.Outcome.SavedAt)));
        Assert.Single(outcomes.Select(o => o.Outcome.SelectedBy).Distinct());
        Assert.True(File.Exists(saver.ModelPath));
        Assert.Equal(saver.Statement.Best!.Number, SearchRecord.Read(saver.RecordPath).Look);
        // Every worker's progress ends on the best of the whole search, also a worker whose own looks are worse (or none).
        var best = saver.Statement.Best!.Score;
        Assert.All(outcomes, o => Assert.Equal(best, o.Reports[^1].Best));
        Assert.Contains(outcomes, o => o.Outcome.Search.Best?.Look.Score != best);

        using var reader = Bookkeeper.Open(Ledger);
        var plan = reader.SharedPlans.FindPlan("team")!;
        var tasks = reader.SharedPlans.Tasks(plan);
        var looks = reader.Store.Looks(reader.Holdout("bakery-validation"));
        Assert.Equal(tasks.Single(t => t.LookNumber == saver.Statement.Best.Number).CompletedBy, saver.SelectedBy);
        // Rungs of 9, 3 and 1 configurations on 1/9, 1/3 and all of the training rows: 13 tasks, 13 looks, numbered 1–13.
        Assert.Equal([9, 3, 1], tasks.GroupBy(t => t.StageIndex).OrderBy(g => g.Key).Select(g => g.Count()));
        Assert.All(tasks, t => Assert.Equal((TaskState.Done, 1), (t.State, t.Attempts)));
        Assert.Equal(Enumerable.Range(1, 13), looks.Select(l => l.Number));
        Assert.Equal(Enumerable.Range(1, 13), tasks.Select(t => t.LookNumber!.Value).Order()); // each look belongs to one task
        Assert.Equal(["0.1111", "0.3333", "1"], looks.Select(l => l.Stage!).Distinct().Order(StringComparer.Ordinal));
        Assert.All(looks, l => Assert.Equal(l.Stage != "0.1111", l.Adaptive)); // promoted looks are adaptive
        Assert.All(looks, l => Assert.Equal("team", l.Search));

        string Canonical(string c) => ConfigurationJson.Canonicalize(c);
        // Rung 0 is the seed's random configurations, as a search of one's own would try them.
        var space = SpaceFile.Read(QuickSpace(), TaskKind.Binary);
        Assert.Equal(
            BinaryTrainers.RandomConfigurations(space, 9, 4).Select(c => Canonical(c.ToJson())),
            tasks.Where(t => t.StageIndex == 0).Select(t => Canonical(t.Configuration)));
        // Each later rung: the best third of the one before by the recorded scores, ties in task order.
        var byNumber = looks.ToDictionary(l => l.Number);
        for (var rung = 0; rung < 2; rung++)
        {
            var before = tasks.Where(t => t.StageIndex == rung).ToList();
            var expected = before.OrderBy(t => byNumber[t.LookNumber!.Value].Score).Take(Math.Max(1, before.Count / 3)).Select(t => t.Configuration);
            Assert.Equal(expected, tasks.Where(t => t.StageIndex == rung + 1).Select(t => t.Configuration));
        }

        var completedBy = tasks.GroupBy(t => t.CompletedBy).Select(g => $"{g.Key}: {g.Count()}");
        Assert.Equal((SaveState.Saved, 1), (reader.SharedPlans.FindSave(plan)!.State, reader.SharedPlans.FindSave(plan)!.Attempts));
        output.WriteLine($"13 tasks by 3 workers: {string.Join(", ", completedBy)}");
        Assert.True(reader.Verify().Valid);
    }

    [Theory]
    [InlineData("random", 7)]
    [InlineData("grid", 7)]
    public void A_fixed_plan_holds_the_configurations_a_search_of_ones_own_would_try_in_its_order(string strategy, int looks)
    {
        var data = BakeryFile.Write(_folder, 120);
        Bookkeeper.Create(Ledger).Dispose();
        PlanOnly(Options(data) with { Strategy = strategy, Looks = looks });
        using var book = Bookkeeper.Open(Ledger);
        var space = SpaceFile.Read(QuickSpace(), TaskKind.Binary);
        ISearchStrategy own = strategy == "grid" ? new GridStrategy(space, looks) : new RandomStrategy(space, looks, 4);
        var count = strategy == "grid" ? Math.Min(looks, ((GridStrategy)own).Count) : looks;
        var tasks = book.SharedPlans.Tasks(book.SharedPlans.FindPlan("team")!);
        Assert.Equal(Enumerable.Range(0, count).Select(i => own.Next(i, []).Configuration.ToJson()), tasks.Select(t => t.Configuration));
        Assert.All(tasks, t => Assert.Equal((TaskState.Pending, 1.0, false, (string?)null), (t.State, t.Fraction, t.Adaptive, t.Stage)));
        Assert.Empty(book.Store.Looks(book.Holdout("bakery-validation")));
    }

    [Fact]
    public void A_worker_whose_settings_differ_from_the_plan_is_refused_naming_the_difference_and_writes_nothing()
    {
        var data = BakeryFile.Write(_folder, 200);
        Bookkeeper.Create(Ledger).Dispose();
        var first = Options(data) with { Strategy = "random", Looks = 3 };
        PlanOnly(first); // a worker stopped before its first claim still leaves the plan and the holdout

        var changed = File.ReadAllLines(data);
        changed[1] = changed[1].Replace(",no", ",yes", StringComparison.Ordinal);
        var otherData = Path.Combine(_folder, "other.csv");
        File.WriteAllLines(otherData, changed);
        var cases = new (TabularSearchOptions Options, ErrorKind Kind, string Names)[]
        {
            (first with { Seed = 5 }, ErrorKind.BadArguments, "this worker's --seed is '5' but the shared search 'team' was planned with '4'"),
            (first with { Looks = 4 }, ErrorKind.BadArguments, "--looks is '4'"),
            (first with { Strategy = "grid" }, ErrorKind.BadArguments, "--strategy is 'grid'"),
            (first with { Guard = Guards.GuardSpec.Parse("rounded:2") }, ErrorKind.BadArguments, "--guard is 'rounded:2'"),
            (first with { ValidationFraction = 0.25 }, ErrorKind.BadArguments, "--validation-fraction is '0.25'"),
            (first with { DataPath = otherData, HoldoutName = "bakery-validation" }, ErrorKind.BadInput, "data file is not the one the shared search 'team' was planned with"),
            (first with { Strategy = "refine" }, ErrorKind.BadArguments, "refine chooses each configuration from every earlier look"),
            (first with { Lease = TimeSpan.FromMilliseconds(200) }, ErrorKind.BadArguments, "--lease must be at least 1 s"),
        };

        using var reader = Bookkeeper.Open(Ledger);
        var plan = reader.SharedPlans.FindPlan("team")!;
        string Snapshot() => $"{reader.Store.ChainHead()} {reader.Store.Holdouts().Count} {JsonSerializer.Serialize(reader.SharedPlans.Tasks(plan))}";
        var before = Snapshot();
        Assert.Equal(3, reader.SharedPlans.Tasks(plan).Count);
        foreach (var (options, kind, names) in cases)
        {
            using var book = Bookkeeper.Open(Ledger);
            var refused = Assert.Throws<AccountantException>(() => new TabularSearch(book, Ledger).Run(options));
            Assert.Equal(kind, refused.Kind);
            Assert.Contains(names, refused.Message);
            Assert.Equal(before, Snapshot());
        }

        // The same settings are accepted, and the worker does the plan's three looks.
        using (var book = Bookkeeper.Open(Ledger))
        {
            Assert.Equal(3, new TabularSearch(book, Ledger).Run(first).Statement.Looks);
        }
    }

    /// <summary>A worker stopped before its first claim: the plan and the holdout are written on arrival, nothing is claimed or trained.</summary>
    private void PlanOnly(TabularSearchOptions options)
    {
        using var book = Bookkeeper.Open(Ledger);
        using var stop = new CancellationTokenSource();
        stop.Cancel();
        Assert.True(new TabularSearch(book, Ledger).Run(options, cancel: stop.Token).Search.Cancelled);
    }

    /// <summary>Progress reports as they came.</summary>
    private sealed class Reports(int stopAt = int.MaxValue, CancellationTokenSource? stop = null) : IProgress<SearchProgress>
    {
        public List<SearchProgress> All { get; } = [];

        public void Report(SearchProgress value)
        {
            lock (All) All.Add(value);
            if (value.Done >= stopAt) stop?.Cancel();
        }
    }

    /// <summary>
    /// One worker does every task of the plan and is stopped right after its last look is recorded, before the closing step:
    /// what a worker killed between its completion and its save leaves behind (the ledger holds every look, no model is saved).
    /// </summary>
    private TabularSearchOutcome StoppedAfterTheLastLook(TabularSearchOptions options)
    {
        using var book = Bookkeeper.Open(Ledger);
        using var stop = new CancellationTokenSource();
        // Progress is reported before each task is trained, with the tasks done so far: at Looks − 1 the last one is
        // next, and the stop is seen only when it has been recorded.
        var outcome = new TabularSearch(book, Ledger).Run(options, new Reports(options.Looks - 1, stop), cancel: stop.Token);
        Assert.True(outcome.Search.Cancelled);
        Assert.False(outcome.ModelSaved);
        var plan = book.SharedPlans.FindPlan(options.Share!)!;
        Assert.All(book.SharedPlans.Tasks(plan), t => Assert.Equal(TaskState.Done, t.State));
        Assert.Null(book.SharedPlans.FindSave(plan));
        Assert.False(File.Exists(outcome.RecordPath));
        return outcome;
    }

    [Fact]
    public void Workers_arriving_together_at_a_finished_plan_whose_model_was_not_saved_save_it_once_by_retraining_the_selected_look()
    {
        var data = BakeryFile.Write(_folder, 240);
        Bookkeeper.Create(Ledger).Dispose();
        var options = Options(data) with { Strategy = "random", Looks = 4 };
        var stopped = StoppedAfterTheLastLook(options);
        string head;
        using (var book = Bookkeeper.Open(Ledger)) head = book.Store.ChainHead()!;

        // Two late workers and a --finish, together: one saves, retraining the selected look (none of them trained it).
        var outcomes = new ConcurrentBag<TabularSearchOutcome>();
        var notes = new ConcurrentBag<string>();
        Together.Run(3, i =>
        {
            using var book = Bookkeeper.Open(Ledger);
            outcomes.Add(new TabularSearch(book, Ledger).Run(options with { Finish = i == 2 }, note: notes.Add));
        });
        var saver = Assert.Single(outcomes, o => o.ModelSaved);
        Assert.All(outcomes, o => Assert.Equal((saver.SharedWorker, saver.RecordPath), (o.SavedBy, o.SavedAt)));
        Assert.Single(notes, n => n.StartsWith("retraining the selected look", StringComparison.Ordinal));
        Assert.All(outcomes, o => Assert.Equal(stopped.SharedWorker, o.SelectedBy)); // the stopped worker trained every look

        using var reader = Bookkeeper.Open(Ledger);
        var plan = reader.SharedPlans.FindPlan("team")!;
        Assert.Equal((SaveState.Saved, 1, saver.SharedWorker), (reader.SharedPlans.FindSave(plan)!.State, reader.SharedPlans.FindSave(plan)!.Attempts, reader.SharedPlans.FindSave(plan)!.Worker));
        Assert.Equal(head, reader.Store.ChainHead()); // saving writes no look
        var record = SearchRecord.Read(saver.RecordPath);
        Assert.Equal(stopped.Statement.Best!.Number, record.Look);
        // The retrained model is the one the look recorded: the same configuration at the same stage on the same seeded
        // split scores the recorded score (checked before saving; checked again here through the saved model).
        var validationIds = reader.Store.Examples(reader.Holdout("bakery-validation")).Select(e => e.Id).ToHashSet();
        var validationRows = Path.Combine(_folder, "validation-rows.csv");
        File.WriteAllLines(validationRows, File.ReadLines(data).Where((line, i) => i == 0 || validationIds.Contains(line.Split(',')[0])));
        Assert.Equal((stopped.Statement.Best.Score, 48), saver.Selected!.Score(Search.Data.RowSource.File(validationRows)));
        var (test, rows, _) = new TabularSearch(reader, Ledger).ScoreTest(record);
        Assert.Equal(48, rows);
        Assert.InRange(test, 0.0, 1.0);
    }

    [Fact]
    public void A_save_whose_holder_stopped_renewing_its_lease_is_taken_over_by_a_later_worker()
    {
        var data = BakeryFile.Write(_folder, 200);
        Bookkeeper.Create(Ledger).Dispose();
        var options = Options(data) with { Strategy = "random", Looks = 3, Lease = TimeSpan.FromSeconds(1) };
        StoppedAfterTheLastLook(options);
        using var book = Bookkeeper.Open(Ledger);
        var plan = book.SharedPlans.FindPlan("team")!;
        // A worker that claimed the closing step and died: its claim stands until its lease runs out.
        Assert.Equal(SaveState.Claimed, book.SharedPlans.ClaimSave(plan, "ghost", TimeSpan.FromSeconds(1)).State);
        var notes = new List<string>();
        var late = new TabularSearch(book, Ledger).Run(options, note: notes.Add);
        Assert.True(late.ModelSaved);
        Assert.Contains(notes, n => n.StartsWith("waiting for worker ghost to save the selected model", StringComparison.Ordinal));
        Assert.Contains(notes, n => n.StartsWith("took over saving the selected model (attempt 2)", StringComparison.Ordinal));
        var save = book.SharedPlans.FindSave(plan)!;
        Assert.Equal((SaveState.Saved, 2, late.SharedWorker, late.Statement.Best!.Number), (save.State, save.Attempts, save.Worker, save.Look));
        Assert.True(File.Exists(late.ModelPath));
    }

    [Fact]
    public void Finish_does_only_the_closing_step_and_refuses_what_it_cannot_finish_writing_nothing()
    {
        var data = BakeryFile.Write(_folder, 200);
        Bookkeeper.Create(Ledger).Dispose();
        var options = Options(data) with { Strategy = "random", Looks = 3 };
        PlanOnly(options);

        using var reader = Bookkeeper.Open(Ledger);
        var plan = reader.SharedPlans.FindPlan("team")!;
        string Snapshot() => $"{reader.Store.ChainHead()} {reader.Store.Holdouts().Count} {JsonSerializer.Serialize(reader.SharedPlans.Tasks(plan))} {reader.SharedPlans.FindSave(plan)}";
        var before = Snapshot();
        foreach (var (refused, says) in new (TabularSearchOptions, string)[]
        {
            (options with { Finish = true }, "the shared search 'team' still has 3 task(s) to do"),
            (options with { Finish = true, Share = null }, "--finish saves the selected model of a shared search"),
            (options with { Finish = true, Share = "nobody" }, "the ledger has no shared search named 'nobody'"),
            (options with { Finish = true, DataPath = Path.Combine(_folder, "missing.csv"), Share = "nobody" }, "no shared search named 'nobody'"), // refused before the data is read
        })
        {
            using var book = Bookkeeper.Open(Ledger);
            var error = Assert.Throws<AccountantException>(() => new TabularSearch(book, Ledger).Run(refused));
            Assert.Equal(ErrorKind.BadArguments, error.Kind);
            Assert.Contains(says, error.Message);
            Assert.Equal(before, Snapshot());
        }

        // Once the tasks are done (by a worker stopped before it saved), --finish saves; a second one finds it saved.
        StoppedAfterTheLastLook(options);
        var head = reader.Store.ChainHead();
        TabularSearchOutcome first, second;
        using (var book = Bookkeeper.Open(Ledger)) first = new TabularSearch(book, Ledger).Run(options with { Finish = true });
        Assert.True(first.ModelSaved);
        Assert.Empty(first.Search.Looks);
        var saved = File.ReadAllText(first.RecordPath);
        using (var book = Bookkeeper.Open(Ledger)) second = new TabularSearch(book, Ledger).Run(options with { Finish = true });
        Assert.False(second.ModelSaved);
        Assert.Equal((first.SharedWorker, first.RecordPath), (second.SavedBy, second.SavedAt));
        Assert.Equal(saved, File.ReadAllText(first.RecordPath));
        Assert.Equal(head, reader.Store.ChainHead());
        Assert.Equal(Shown(first.Statement), Shown(second.Statement));
    }
}
