using Accountant.Bounds;
using Accountant.Ledger;
using Accountant.Statements;
using Accountant.Tests.Support;

namespace Accountant.Tests.Statements;

public class PerExampleMethodsTests
{
    /// <summary>A store that counts how often per-example losses are read.</summary>
    private sealed class CountingStore(ILedgerStore inner) : ForwardingStore(inner)
    {
        public int LossReads { get; private set; }

        public override byte[]? LossBytes(Holdout holdout, int lookNumber)
        {
            LossReads++;
            return base.LossBytes(holdout, lookNumber);
        }
    }

    [Fact]
    public void A_statement_reads_per_example_losses_only_when_a_method_needs_them()
    {
        using var temp = new TempLedger();
        var examples = TempLedger.Examples(200);
        using (var book = temp.Create())
        {
            book.RegisterHoldout("v", examples);
            for (var k = 0; k < 5; k++) book.Record("v", $$"""{"k":{{k}}}""", TempLedger.Predictions(examples, 20 + k));
            book.Void("v", 2, "a mistake");
        }

        var store = new CountingStore(SqliteLedgerStore.Open(temp.Path));
        using var counted = new Bookkeeper(store);
        // A plain statement reads each look's losses once, for the correlation-aware guarantee (every look has them).
        var plain = counted.Statement("v");
        Assert.Equal(5, store.LossReads);
        Assert.Contains(plain.Bounds, b => b.Method == ChainedBinomial.Name);
        Assert.Empty(plain.Estimates);
        Assert.Null(plain.Winner);

        var full = counted.Statement("v", new StatementOptions { Estimates = true, Winner = true, Resamples = 200, Seed = 3 });
        Assert.Equal(15, store.LossReads); // 5 more for the anchors, and 5 for the bootstrap and the winner test
        Assert.Equal(2, full.Estimates.Count);
        Assert.All(full.Estimates, e => Assert.Equal(5, e.Looks));
        // Predictions wrong on a prefix of the examples: look 1 (20 errors) is nested in every other look, so its
        // rivals disagree with it only where they err more. Look 2 is voided and is not compared.
        Assert.Equal(1, full.Best!.Number);
        Assert.Equal(3, full.Winner!.Rivals.Count);
        Assert.DoesNotContain(full.Winner.Rivals, r => r.Look == 2);
        Assert.Equal(3, full.Winner.RunnerUp!.LookB);
        Assert.Equal(0, full.Winner.RunnerUp.OnlyA);
        Assert.Equal(2, full.Winner.RunnerUp.OnlyB);

        // One look with only a score: the correlation-aware guarantee cannot be computed, so nothing is read for it, and the
        // statement says why it fell back to the union bound.
        using (var book = temp.Open()) book.Record("v", """{"k":9}""", 0.5);
        var before = store.LossReads;
        var fallback = counted.Statement("v");
        Assert.Equal(before, store.LossReads);
        Assert.DoesNotContain(fallback.Bounds, b => b.Method == ChainedBinomial.Name);
        Assert.Contains("1 of 6 looks carry only a score", fallback.CorrelationNote);
    }

    [Fact]
    public void Accuracy_estimates_are_lower_bounds_on_the_accuracy_scale()
    {
        using var temp = new TempLedger();
        var examples = TempLedger.Examples(300);
        using var book = temp.Create();
        book.RegisterHoldout("v", examples, Metric.Accuracy);
        for (var k = 0; k < 4; k++) book.Record("v", $$"""{"k":{{k}}}""", TempLedger.Predictions(examples, 30 + 5 * k));
        var statement = book.Statement("v", new StatementOptions { Estimates = true, Resamples = 300 });
        Assert.Equal(0.9, statement.Best!.Score, 12);
        foreach (var line in statement.Estimates)
        {
            Assert.True(line.Bound < 0.9, $"{line.Method} {line.Bound}");
            Assert.Equal(line.Lower, line.Bound);
            Assert.Equal(0.9 - line.Bound, line.Margin, 12);
        }

        var bbc = statement.Estimates.Single(e => e.Method == PerExampleMethods.BootstrapBias);
        Assert.InRange(bbc.Estimate!.Value, 0.8, 0.95);
    }
}

public class LossInputTests
{
    [Fact]
    public void Losses_given_directly_are_stored_with_their_score_and_bad_ones_are_refused_with_nothing_written()
    {
        using var temp = new TempLedger();
        using var book = temp.Create();
        book.RegisterHoldout("v", TempLedger.Examples(10));
        var look = book.RecordMany("v", [new LookInput { Configuration = "{}", Losses = [0b0000_0111, 0b01] }])[0];
        Assert.Equal(0.4, look.Score, 12);
        Assert.Equal([0b0000_0111, 0b01], book.Store.LossBytes(book.Holdout("v"), 1));
        var head = book.Store.ChainHead();
        var tooShort = Assert.Throws<AccountantException>(() => book.RecordMany("v", [new LookInput { Configuration = "{}", Losses = [1] }]));
        Assert.Equal(ErrorKind.BadInput, tooShort.Kind);
        var spare = Assert.Throws<AccountantException>(() => book.RecordMany("v", [new LookInput { Configuration = "{}", Losses = [0, 0b100] }]));
        Assert.Contains("spare bits", spare.Message);
        var both = Assert.Throws<AccountantException>(() => book.RecordMany("v", [new LookInput { Configuration = "{}", Losses = [0, 0], Score = 0.1 }]));
        Assert.Equal(ErrorKind.BadArguments, both.Kind);
        Assert.Equal(head, book.Store.ChainHead());
        Assert.True(book.Verify().Valid);
    }
}
