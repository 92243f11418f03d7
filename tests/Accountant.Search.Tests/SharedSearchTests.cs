using System.Collections.Concurrent;
using System.Text.Json;
using Accountant.Ledger;
using Accountant.Search.Data;
using Accountant.Search.Trainers;
using Accountant.Statements;
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
        var outcomes = new ConcurrentBag<TabularSearchOutcome>();
        var errors = new ConcurrentBag<Exception>();
        var options = Options(data); // one set of settings, its space file written before any worker starts
        var workers = Enumerable.Range(0, 3).Select(_ => new Thread(() =>
        {
            try
            {
                using var book = Bookkeeper.Open(Ledger);
                outcomes.Add(new TabularSearch(book, Ledger).Run(options));
            }
            catch (Exception e)
            {
                errors.Add(e);
            }
        })).ToList();
        workers.ForEach(t => t.Start());
        workers.ForEach(t => t.Join());
        Assert.Empty(errors);
        Assert.Equal(3, outcomes.Count);

        // The statement is the same whichever worker printed it.
        Assert.Single(outcomes.Select(o => Shown(o.Statement)).Distinct());
        // Exactly one worker holds the selected look's model and saves it; the others name that worker.
        var saver = Assert.Single(outcomes, o => o.ModelSaved);
        Assert.All(outcomes, o => Assert.Equal(saver.SharedWorker, o.SelectedBy));
        Assert.True(File.Exists(saver.ModelPath));

        using var reader = Bookkeeper.Open(Ledger);
        var plan = reader.SharedPlans.FindPlan("team")!;
        var tasks = reader.SharedPlans.Tasks(plan);
        var looks = reader.Store.Looks(reader.Holdout("bakery-validation"));
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
        using var book = Bookkeeper.Open(Ledger);
        using var stop = new CancellationTokenSource();
        stop.Cancel(); // the plan is written on arrival; no configuration is claimed or trained
        new TabularSearch(book, Ledger).Run(Options(data) with { Strategy = strategy, Looks = looks }, cancel: stop.Token);
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
        using (var book = Bookkeeper.Open(Ledger))
        {
            // A worker stopped before its first claim still leaves the plan and the holdout.
            using var stop = new CancellationTokenSource();
            stop.Cancel();
            Assert.True(new TabularSearch(book, Ledger).Run(first, cancel: stop.Token).Search.Cancelled);
        }

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
}
