using Accountant.Bounds;
using Accountant.Guards;
using Accountant.Ledger;
using Accountant.Statements;
using Accountant.Tests.Support;

namespace Accountant.Tests.Statements;

public sealed class SqliteCorrelationAwareTests() : CorrelationAwareContract(Backend.Sqlite);

public sealed class PostgresCorrelationAwareTests() : CorrelationAwareContract(Backend.Postgres);

/// <summary>The correlation-aware guarantee in a statement read from a ledger, on each backend.</summary>
public abstract class CorrelationAwareContract(Backend backend) : IDisposable
{
    private readonly TempLedger _temp = new(backend);

    public void Dispose()
    {
        _temp.Dispose();
        GC.SuppressFinalize(this);
    }

    /// <summary>Looks that err on the same first <paramref name="shared"/> examples and on a few of their own.</summary>
    private static byte[] Losses(int n, int shared, int own, int offset)
    {
        var bytes = new byte[(n + 7) / 8];
        for (var i = 0; i < shared; i++) bytes[i >> 3] |= (byte)(1 << (i & 7));
        for (var j = 0; j < own; j++)
        {
            var i = shared + (offset * 7 + j * 13) % (n - shared);
            bytes[i >> 3] |= (byte)(1 << (i & 7));
        }

        return bytes;
    }

    [Fact]
    public void Near_identical_looks_get_a_tighter_guarantee_whose_parts_and_effective_count_the_statement_reports()
    {
        const int n = 5000, looks = 100;
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(n));
        // Every look errs on the same 900 examples and on 20 to 40 of its own: strongly correlated, nearly equal errors.
        book.RecordMany("validation", Enumerable.Range(0, looks).Select(k => new LookInput
        {
            Configuration = $$"""{"trainer":"{{(k < 60 ? "trees" : "linear")}}","k":{{k}}}""", Losses = Losses(n, 900, 20 + k % 21, k),
        }).ToList());
        var statement = book.Statement("validation");

        var chained = statement.Bounds.Single(b => b.Method == ChainedBinomial.Name);
        var union = statement.Bounds.Single(b => b.Method == BinomialUnion.Name);
        Assert.True(chained.Tightest);
        Assert.True(chained.Margin < union.Margin, $"chained {chained.Margin} against union {union.Margin}");
        // Three anchors: every look (weight ½) and each trainer's looks (¼ each), all majorities equal to the shared 900 errors.
        Assert.Equal(["all", "trainer=linear", "trainer=trees"], statement.Anchors.Select(a => a.Name));
        Assert.Equal([0.5, 0.25, 0.25], statement.Anchors.Select(a => a.Weight));
        Assert.All(statement.Anchors, a => Assert.Equal(900, a.Errors));
        // The bound is the chained-binomial formula on those counts (checked against SciPy in ChainedBinomialTests).
        var inputs = new ChainedInputs(looks, statement.Anchors);
        Assert.Equal(ChainedBinomial.Bound(n, looks, inputs.Counts, inputs.Increments, 0.05).Interval.Upper, chained.Bound, 12);
        // The split: one look's exact binomial margin plus what the comparisons add, summing to the tightest margin.
        var split = statement.Split!;
        var errors = (long)Math.Round(statement.Best!.Score * n);
        Assert.Equal(BinomialUnion.Bound(errors, n, 1, 0.05).Upper - statement.Best.Score, split.Sampling, 12);
        Assert.Equal(chained.Margin, split.Sampling + split.Comparisons, 12);
        Assert.Equal(BinomialUnion.Name, split.SamplingMethod);
        // Fewer effective comparisons than looks, and the union over that many gives the chained bound.
        var effective = statement.EffectiveComparisons!.Value;
        Assert.InRange(effective, 1, looks - 1);
        Assert.Equal(chained.Bound, BinomialUnion.BoundLog(errors, n, Math.Log(effective), 0.05).Upper, 6);
        Assert.Null(statement.CorrelationNote);
    }

    [Fact]
    public void Without_every_look_s_losses_or_with_adaptive_looks_the_statement_uses_the_union_and_says_why()
    {
        const int n = 400;
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(n));
        book.RecordMany("validation", Enumerable.Range(0, 5).Select(k => new LookInput { Configuration = $"{{\"k\":{k}}}", Losses = Losses(n, 60, 5 + k, k) }).ToList());
        Assert.Contains(book.Statement("validation").Bounds, b => b.Method == ChainedBinomial.Name);

        book.Record("validation", """{"k":9}""", 0.3);
        var scoreOnly = book.Statement("validation");
        Assert.DoesNotContain(scoreOnly.Bounds, b => b.Method == ChainedBinomial.Name);
        Assert.Equal(BinomialUnion.Name, scoreOnly.Primary!.Method);
        Assert.Equal("chained-binomial needs every look's per-example losses, but 1 of 6 looks carry only a score, so the statement uses the union bound over all 6 looks; record predictions (not scores) to let correlated configurations cost less.", scoreOnly.CorrelationNote);
        Assert.Null(scoreOnly.EffectiveComparisons);

        using var other = new TempLedger(backend);
        using var adaptive = other.Create();
        adaptive.RegisterHoldout("validation", TempLedger.Examples(n));
        adaptive.RecordMany("validation", [
            new LookInput { Configuration = "{}", Losses = Losses(n, 60, 5, 0) },
            new LookInput { Configuration = """{"k":1}""", Losses = Losses(n, 60, 6, 1), Adaptive = true, Guard = GuardSpec.Ladder(0.02) },
        ]);
        var statement = adaptive.Statement("validation");
        Assert.DoesNotContain(statement.Bounds, b => b.Method == ChainedBinomial.Name);
        Assert.StartsWith("chained-binomial is for looks fixed in advance; 1 look(s) here are adaptive", statement.CorrelationNote);
        // The split still applies: the adaptive accounting's margin against one look's.
        Assert.Equal(statement.Primary!.Margin, statement.Split!.Sampling + statement.Split.Comparisons, 12);
    }

    [Fact]
    public void Losses_of_the_wrong_example_count_are_refused_in_one_line_and_nothing_is_written()
    {
        const int n = 400;
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(n));
        book.RecordMany("validation", [new LookInput { Configuration = "{}", Losses = Losses(n, 60, 5, 0) }]);
        var head = book.Store.ChainHead();
        var error = Assert.Throws<AccountantException>(() => book.RecordMany("validation", [
            new LookInput { Configuration = """{"k":1}""", Losses = Losses(n, 60, 6, 1) },
            new LookInput { Configuration = """{"k":2}""", Losses = new byte[(n + 7) / 8 + 1] },
        ]));
        Assert.Equal(ErrorKind.BadInput, error.Kind);
        Assert.Equal("look 2 of 2: the loss bitset holds 51 bytes, but holdout 'validation' has 400 examples and needs 50; give one bit per example in id order. Nothing was recorded.", error.Message);
        Assert.DoesNotContain('\n', error.Message);
        Assert.Equal(head, book.Store.ChainHead());
    }

    [Fact]
    public void Voids_do_not_change_the_anchors_and_the_estimates_path_gives_the_same_bound()
    {
        // The anchors are fixed by which looks exist, not by which were voided later; and a statement that reads every look
        // (for --winner) computes the same chained bound as the tally path.
        const int n = 600;
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(n));
        book.RecordMany("validation", Enumerable.Range(0, 9).Select(k => new LookInput { Configuration = $"{{\"k\":{k}}}", Losses = Losses(n, 100, 3 + 2 * k, k) }).ToList());
        var before = book.Statement("validation");
        book.Void("validation", 1, "trained on the wrong split");
        var after = book.Statement("validation");
        Assert.Equal(before.Anchors.Select(a => a.Errors), after.Anchors.Select(a => a.Errors));
        Assert.NotEqual(before.Best!.Number, after.Best!.Number);
        var winner = book.Statement("validation", new StatementOptions { Winner = true });
        Assert.Equal(after.Bounds.Single(b => b.Method == ChainedBinomial.Name).Bound, winner.Bounds.Single(b => b.Method == ChainedBinomial.Name).Bound, 15);
    }
}
