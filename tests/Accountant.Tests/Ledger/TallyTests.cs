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
