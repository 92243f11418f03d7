using Accountant.Ledger;
using Accountant.Statements;
using Accountant.Tests.Support;

namespace Accountant.Tests.Ledger;

/// <summary>Each backend's tally (counts and the best look computed in the database) against the definition, look by look.</summary>
public class TallyTests
{
    /// <summary>A store that keeps the interface's default tally, which reads every look.</summary>
    private sealed class DefaultTally(ILedgerStore inner) : ForwardingStore(inner);

    [Theory]
    [InlineData(Metric.Error, Backend.Sqlite)]
    [InlineData(Metric.Accuracy, Backend.Sqlite)]
    [InlineData(Metric.Error, Backend.Postgres)]
    [InlineData(Metric.Accuracy, Backend.Postgres)]
    public void The_database_tally_equals_the_look_by_look_definition(Metric metric, Backend backend)
    {
        using var temp = new TempLedger(backend);
        var examples = TempLedger.Examples(50);
        using var book = temp.Create();
        book.RegisterHoldout("v", examples, metric);
        book.RegisterHoldout("other", examples, metric);
        // Ties on the best score (looks 2 and 4, both error 0.1 / accuracy 0.9), the earliest voided; score-only and adaptive looks.
        book.Record("v", """{"k":1}""", TempLedger.Predictions(examples, 15));
        book.Record("v", """{"k":2}""", TempLedger.Predictions(examples, 5));
        book.Record("v", """{"k":3}""", metric == Metric.Error ? 0.3 : 0.7, adaptive: true);
        book.Record("v", """{"k":4}""", TempLedger.Predictions(examples, 5), adaptive: true);
        book.Record("v", """{"k":5}""", TempLedger.Predictions(examples, 5));
        book.Record("other", """{"k":6}""", TempLedger.Predictions(examples, 0));
        book.Void("v", 2, "a mistake");

        var holdout = book.Holdout("v");
        var voided = book.Store.Voids(holdout).Select(v => v.LookNumber).ToHashSet();
        var fast = book.Store.Tally(holdout, voided);
        var reference = ((ILedgerStore)new DefaultTally(book.Store)).Tally(holdout, voided);
        Assert.Equal(reference with { Pattern = null }, fast with { Pattern = null });
        Assert.Equal(new LookTally(5, 2, 1, reference.Best), fast with { Pattern = null });
        // With adaptive looks the tally carries every look's flag and guard, in order.
        Assert.Equal(reference.Pattern!, fast.Pattern!);
        Assert.Equal([false, false, true, true, false], fast.Pattern!.Select(p => p.Adaptive));
        Assert.Equal(4, fast.Best!.Number);
        Assert.Equal("""{"k":4}""", fast.Best.Configuration);

        // The statement built from the tally is the statement built from every look.
        var fromLooks = StatementBuilder.Build(holdout, book.Store.Looks(holdout), book.Store.Voids(holdout), book.Store.ChainHead());
        var fromTally = book.Statement("v");
        Assert.Equal(fromLooks.Looks, fromTally.Looks);
        Assert.Equal(fromLooks.Best, fromTally.Best);
        Assert.Equal(fromLooks.Bounds, fromTally.Bounds);
        Assert.Equal(fromLooks.Warnings, fromTally.Warnings);
    }

    [Theory]
    [InlineData(Metric.Error, Backend.Sqlite)]
    [InlineData(Metric.Accuracy, Backend.Sqlite)]
    [InlineData(Metric.Error, Backend.Postgres)]
    public void With_the_best_scores_voided_the_tally_still_equals_the_definition(Metric metric, Backend backend)
    {
        // Scores from a small set (many ties), the looks holding the best score and some of the next best voided, so the
        // best is found behind voided looks; the reference is the default tally, which reads every look.
        using var temp = new TempLedger(backend);
        var examples = TempLedger.Examples(20);
        using var book = temp.Create();
        book.RegisterHoldout("v", examples, metric);
        book.RegisterHoldout("empty", examples, metric);
        var random = new Random(12);
        var scores = Enumerable.Range(0, 60).Select(_ => random.Next(1, 8) / 10.0).ToArray();
        for (var i = 0; i < scores.Length; i++) book.Record("v", $$"""{"k":{{i}}}""", scores[i], adaptive: i % 7 == 0);
        var better = metric == Metric.Error ? scores.Min() : scores.Max();
        var second = metric == Metric.Error ? scores.Where(x => x > better).Min() : scores.Where(x => x < better).Max();
        for (var i = 0; i < scores.Length; i++)
        {
            if (scores[i] == better || (scores[i] == second && i % 2 == 0)) book.Void("v", i + 1, "a mistake");
        }

        foreach (var name in new[] { "v", "empty" })
        {
            var holdout = book.Holdout(name);
            var voided = book.Store.Voids(holdout).Select(v => v.LookNumber).ToHashSet();
            var fast = book.Store.Tally(holdout, voided);
            var reference = ((ILedgerStore)new DefaultTally(book.Store)).Tally(holdout, voided);
            Assert.Equal(reference with { Pattern = null }, fast with { Pattern = null });
            Assert.Equal(reference.Pattern, fast.Pattern);
        }

        // The best is the earliest look with the second-best score that is not voided: an odd index.
        var best = book.Store.Tally(book.Holdout("v"), book.Store.Voids(book.Holdout("v")).Select(v => v.LookNumber).ToHashSet()).Best!;
        Assert.Equal(second, best.Score);
        Assert.Equal(Enumerable.Range(0, scores.Length).First(i => scores[i] == second && i % 2 == 1) + 1, best.Number);
    }

    [Theory]
    [InlineData(Backend.Sqlite)]
    [InlineData(Backend.Postgres)]
    public void A_holdout_whose_looks_are_all_voided_has_no_best(Backend backend)
    {
        using var temp = new TempLedger(backend);
        var examples = TempLedger.Examples(10);
        using var book = temp.Create();
        book.RegisterHoldout("v", examples);
        book.Record("v", "{}", 0.5);
        book.Void("v", 1, "wrong data");
        var tally = book.Store.Tally(book.Holdout("v"), new HashSet<int> { 1 });
        Assert.Equal(1, tally.Looks);
        Assert.Null(tally.Best);
    }
}
