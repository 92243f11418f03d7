using Accountant.Search.Demo;
using Accountant.Search.Trainers;

namespace Accountant.Search.Tests;

public sealed class DemoRunnerTests : IDisposable
{
    private readonly string _folder = Path.Combine(Path.GetTempPath(), "accountant-search-" + Guid.NewGuid().ToString("N"));

    public DemoRunnerTests() => Directory.CreateDirectory(_folder);

    public void Dispose()
    {
        try { Directory.Delete(_folder, true); } catch (IOException) { }
    }

    [Fact]
    public void A_small_demo_trains_every_trainer_records_every_look_and_measures_the_truth()
    {
        using var book = Bookkeeper.Create(Path.Combine(_folder, "demo.db"));
        var options = new DemoOptions { Looks = 5, TrainingRows = 600, ValidationRows = 400, FreshRows = 20_000, Seed = 11 };
        var reports = new List<SearchProgress>();
        var outcome = BakeryDemo.Run(book, options, new Progress(reports));

        Assert.False(outcome.Search.Cancelled);
        Assert.Equal(5, outcome.Search.Looks.Count);
        // Trainers are taken in turn, so five looks train each of the five trainers once.
        Assert.Equal(BinaryTrainers.DefaultSpace.Select(s => s.Trainer), outcome.Search.Looks.Select(l => l.Configuration.Trainer));
        var holdout = book.Holdout(options.HoldoutName);
        var looks = book.Store.Looks(holdout);
        Assert.Equal([1, 2, 3, 4, 5], looks.Select(l => l.Number));
        Assert.All(looks, l => Assert.True(l.HasLosses));
        Assert.All(looks, l => Assert.NotNull(l.Seconds));
        Assert.True(book.Verify().Valid);

        var statement = outcome.Statement;
        Assert.Equal(5, statement.Looks);
        Assert.Equal(outcome.Search.Best!.Look.Number, statement.Best!.Number);
        Assert.Equal("binomial-union", statement.Primary!.Method);
        Assert.InRange(outcome.SelectedTrueError, 0.0, 0.5);
        // A fact of the trade: no classifier beats the Bayes error (allow 4 standard errors of the fresh-sample estimate).
        Assert.True(outcome.SelectedTrueError >= outcome.BayesError - 4 * outcome.SelectedTrueErrorStdErr);
        Assert.Equal(20_000, outcome.FreshRows);
        // Progress was reported before each look and once at the end.
        Assert.Equal(6, reports.Count);
        Assert.Equal(5, reports[^1].Done);
    }

    [Fact]
    public void Rerunning_the_demo_on_the_same_ledger_keeps_counting_looks_on_the_same_holdout()
    {
        using var book = Bookkeeper.Create(Path.Combine(_folder, "twice.db"));
        var options = new DemoOptions { Looks = 2, TrainingRows = 200, ValidationRows = 100, FreshRows = 2000, Seed = 3 };
        var first = BakeryDemo.Run(book, options);
        var second = BakeryDemo.Run(book, options);
        Assert.Equal(4, second.Statement.Looks);
        // The same days and seed give the same looks again, so the selected look is the first run's (the earliest of equal
        // scores); this run retrains it to the same per-example losses and measures the same true error on the same fresh days.
        Assert.Equal(first.Statement.Best!.Number, second.Statement.Best!.Number);
        Assert.Equal(first.SelectedTrueError, second.SelectedTrueError);
        Assert.Throws<AccountantException>(() => BakeryDemo.Run(book, options with { ValidationRows = 150 }));
    }

    [Fact]
    public void Cancelling_stops_after_the_look_in_progress_and_keeps_what_was_done()
    {
        using var book = Bookkeeper.Create(Path.Combine(_folder, "cancel.db"));
        using var cancel = new CancellationTokenSource();
        var progress = new Progress([], after: 2, cancel);
        var outcome = BakeryDemo.Run(book, new DemoOptions { Looks = 6, TrainingRows = 200, ValidationRows = 100, FreshRows = 2000 }, progress, cancel.Token);
        Assert.True(outcome.Search.Cancelled);
        Assert.Equal(2, outcome.Statement.Looks);
        Assert.True(book.Verify().Valid);
    }

    [Fact]
    public void The_scenario_is_reproducible_from_its_seed_and_follows_its_rule()
    {
        var a = BakeryScenario.Generate(2000, 5);
        var b = BakeryScenario.Generate(2000, 5);
        Assert.Equal(a.Select(d => (d.Weekday, d.Temperature, d.Label)), b.Select(d => (d.Weekday, d.Temperature, d.Label)));
        // The labels are coin flips with the rule's probabilities: the mean label matches the mean probability
        // within 4 standard errors (sqrt(0.25/n)).
        var fresh = BakeryScenario.Generate(50_000, 9);
        Assert.Equal(fresh.Average(d => d.TrueProbability), fresh.Average(d => d.Label ? 1.0 : 0.0), 4 * Math.Sqrt(0.25 / fresh.Count));
        Assert.InRange(BakeryScenario.BayesError(fresh), 0.10, 0.25);
    }

    [Fact]
    public void Sampled_configurations_stay_inside_their_ranges()
    {
        var configurations = BinaryTrainers.RandomConfigurations(BinaryTrainers.DefaultSpace, 500, 1);
        foreach (var configuration in configurations)
        {
            var space = BinaryTrainers.DefaultSpace.Single(s => s.Trainer == configuration.Trainer);
            foreach (var range in space.Parameters)
            {
                var value = configuration.Values[range.Name];
                Assert.InRange(value, range.Low, range.High);
                if (range.IsWhole) Assert.Equal(Math.Floor(value), value);
            }

            Assert.StartsWith("{\"trainer\":\"" + configuration.Trainer + "\"", configuration.ToJson());
        }
    }

    private sealed class Progress(List<SearchProgress> reports, int after = int.MaxValue, CancellationTokenSource? cancel = null) : IProgress<SearchProgress>
    {
        public void Report(SearchProgress value)
        {
            reports.Add(value);
            if (value.Done >= after) cancel?.Cancel();
        }
    }
}

public sealed class RefineStrategyTests : IDisposable
{
    private readonly string _folder = Path.Combine(Path.GetTempPath(), "accountant-refine-" + Guid.NewGuid().ToString("N"));

    public RefineStrategyTests() => Directory.CreateDirectory(_folder);

    public void Dispose()
    {
        try { Directory.Delete(_folder, true); } catch (IOException) { }
    }

    [Fact]
    public void Refine_records_its_later_looks_as_adaptive_and_the_statement_counts_the_guards_release_sequences()
    {
        using var book = Bookkeeper.Create(Path.Combine(_folder, "refine.db"));
        var options = new DemoOptions { Looks = 8, TrainingRows = 300, ValidationRows = 300, FreshRows = 2000, Strategy = "refine", Guard = Guards.GuardSpec.Ladder(0.02) };
        var outcome = BakeryDemo.Run(book, options);
        var looks = book.Store.Looks(book.Holdout(options.HoldoutName));
        // The first max(5 trainers, 8/5) looks are fixed; the rest nudge the best told configuration.
        Assert.Equal(Enumerable.Range(0, 8).Select(i => i >= 5), looks.Select(l => l.Adaptive));
        Assert.All(looks, l => Assert.Equal("ladder:0.02", l.Release!.Guard));
        Assert.Equal("adaptive-transcript", outcome.Statement.Primary!.Method);
        var expected = Accountant.Guards.AdaptiveAccounting.LogEffectiveLooks(
            looks.Select(l => new Accountant.Guards.AccountedLook(l.Adaptive, Accountant.Guards.GuardSpec.Ladder(0.02))).ToList(),
            Accountant.Guards.ValueSpace.ZeroOne(300));
        Assert.Equal(expected, outcome.Statement.LogEffectiveLooks, 12);
    }

    [Fact]
    public void Neighbours_stay_in_range_and_on_the_same_trainer()
    {
        var random = new Random(4);
        foreach (var space in BinaryTrainers.DefaultSpace)
        {
            var configuration = space.Sample(random);
            for (var i = 0; i < 200; i++)
            {
                configuration = space.Neighbour(configuration, random);
                Assert.Equal(space.Trainer, configuration.Trainer);
                foreach (var range in space.Parameters)
                {
                    Assert.InRange(configuration.Values[range.Name], range.Low, range.High);
                    if (range.IsWhole) Assert.Equal(Math.Floor(configuration.Values[range.Name]), configuration.Values[range.Name]);
                }
            }
        }
    }
}
