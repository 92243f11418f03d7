using Accountant.Bounds;
using Accountant.Ledger;
using Accountant.Statements;

namespace Accountant.Tests.Statements;

public class StatementBuilderTests
{
    private static Holdout Holdout(Metric metric = Metric.Error, int n = 1000, LossRange? range = null) =>
        new(1, "validation", n, metric, range ?? LossRange.Unit, "f", DateTimeOffset.UnixEpoch);

    private static List<Look> Looks(params double[] scores) =>
        scores.Select((s, i) => new Look(i + 1, i + 1, "{}", "d", s, LossEncoding.None, null, null, false, DateTimeOffset.UnixEpoch)).ToList();

    [Fact]
    public void Ten_looks_at_best_error_ten_percent_give_the_check_values()
    {
        // n = 1000, best observed 0.10, M = 10, δ = 0.05 one-sided: binomial 0.1269 (SciPy 1.10.1), hoeffding 0.1515 (arithmetic).
        var looks = Looks(0.2, 0.15, 0.1, 0.3, 0.12, 0.11, 0.5, 0.4, 0.13, 0.1);
        var statement = StatementBuilder.Build(Holdout(), looks, [], "head");
        Assert.Equal(10, statement.Looks);
        Assert.Equal(3, statement.Best!.Number); // the earliest of the two tied bests
        Assert.Equal(BinomialUnion.Name, statement.Bounds[0].Method);
        Assert.Equal(0.1269, statement.Bounds[0].Bound, 4);
        Assert.Equal(0.0269, statement.Bounds[0].Margin, 4);
        Assert.True(statement.Bounds[0].Tightest);
        // KL inversion at ln(10/δ)/n lies between the two (SciPy's value for M = 1 is checked in TighterBoundTests).
        Assert.Equal([BinomialUnion.Name, KlUnion.Name, HoeffdingUnion.Name], statement.Bounds.Select(b => b.Method));
        Assert.Equal(0.1515, statement.Bounds[2].Bound, 4);
        Assert.All(statement.Bounds, b => Assert.True(b.Guarantee));
        Assert.Equal("head", statement.ChainHead);
        Assert.Contains(statement.Warnings, w => w.Code == "score-only-looks");
        Assert.Equal(Cautions.All, statement.Cautions);
    }

    [Fact]
    public void Accuracy_is_bounded_from_below_as_the_complement_of_the_error()
    {
        var statement = StatementBuilder.Build(Holdout(Metric.Accuracy), Looks(0.8, 0.9, 0.85), [], null);
        Assert.Equal(2, statement.Best!.Number);
        var expected = 1 - BinomialUnion.Bound(100, 1000, 3, 0.05).Upper;
        Assert.Equal(expected, statement.Bounds[0].Bound, 12);
        Assert.True(statement.Bounds[0].Bound < 0.9);
    }

    [Fact]
    public void Voided_looks_count_but_cannot_be_selected()
    {
        var voids = new List<LookVoid> { new(9, 1, "leak", DateTimeOffset.UnixEpoch) };
        var statement = StatementBuilder.Build(Holdout(), Looks(0.05, 0.2), voids, null);
        Assert.Equal(2, statement.Looks);
        Assert.Equal(2, statement.Best!.Number);
        Assert.Equal(BinomialUnion.Bound(200, 1000, 2, 0.05).Upper, statement.Bounds[0].Bound, 12);
        Assert.Contains(statement.Warnings, w => w.Code == "voided-looks");
    }

    [Fact]
    public void Overuse_and_single_look_are_warned_about()
    {
        var small = Holdout(n: 100);
        var many = StatementBuilder.Build(small, Looks(Enumerable.Repeat(0.3, 50).ToArray()), [], null, new StatementOptions { Tolerance = 0.05 });
        Assert.True(many.Budget.Overused);
        Assert.Equal(0, many.Budget.LooksLeft);
        Assert.Contains(many.Warnings, w => w.Code == "holdout-overused");
        var one = StatementBuilder.Build(Holdout(), Looks(0.1), [], null);
        Assert.Contains(one.Warnings, w => w.Code == "single-look");
        Assert.DoesNotContain(one.Warnings, w => w.Code == "holdout-overused");
        Assert.Equal(BinomialUnion.MaxLooks(100, 1000, 0.02, 0.05) - 1, one.Budget.LooksLeft);
    }

    [Fact]
    public void Regression_metrics_use_hoeffding_over_the_declared_range()
    {
        var statement = StatementBuilder.Build(Holdout(Metric.AbsoluteError, 500, new LossRange(0, 5)), Looks(1.2, 0.9), [], null);
        // Score-only looks: no per-example losses, so no empirical Bernstein line; Hoeffding and KL remain.
        Assert.Equal(2, statement.Bounds.Count);
        var hoeffding = statement.Bounds.Single(b => b.Method == HoeffdingUnion.Name);
        Assert.Equal(0.9 + 5 * Math.Sqrt(Math.Log(2 / 0.05) / 1000), hoeffding.Bound, 12);
        Assert.Equal(HoeffdingUnion.MaxLooks(500, 0.02, 0.05, 5.0), statement.Budget.MaxLooks);
    }

    [Fact]
    public void Hand_given_scores_that_are_not_whole_counts_round_to_the_conservative_side()
    {
        Assert.Equal(100, StatementBuilder.ErrorCount(0.1, 1000, roundUp: true));
        // 0.1234 × 1005 = 124.017: not a whole count.
        Assert.Equal(125, StatementBuilder.ErrorCount(0.1234, 1005, roundUp: true));
        Assert.Equal(124, StatementBuilder.ErrorCount(0.1234, 1005, roundUp: false));
    }

    [Fact]
    public void Two_sided_statements_report_both_ends()
    {
        var statement = StatementBuilder.Build(Holdout(n: 25), Looks(0.2), [], null, new StatementOptions { Sided = Sidedness.TwoSided });
        // Conover's worked example 5/25 → 0.068–0.407 (95% two-sided Clopper–Pearson, M = 1).
        Assert.Equal(0.068, statement.Bounds[0].Lower, 3);
        Assert.Equal(0.407, statement.Bounds[0].Upper, 3);
    }
}

public class AucStatementTests
{
    [Fact]
    public void Auc_holdouts_report_the_auc_union_lower_bound()
    {
        var holdout = new Holdout(1, "ranked", 500, Metric.Auc, LossRange.Unit, "f", DateTimeOffset.UnixEpoch);
        var looks = new List<Look> { new(1, 1, "{}", "d", 0.82, LossEncoding.Scores, null, null, false, DateTimeOffset.UnixEpoch) };
        var statement = StatementBuilder.Build(holdout, looks, [], null, inputs: new StatementInputs(Positives: 100));
        // Agarwal et al. 2005, one-sided: ε = sqrt((m+n)·ln(1/δ)/(2mn)) with m = 100, n = 400.
        var margin = Math.Sqrt(500 * Math.Log(20) / (2.0 * 100 * 400));
        Assert.Equal(AucUnion.Name, statement.Bounds[0].Method);
        Assert.Equal(0.82 - margin, statement.Bounds[0].Bound, 12);
    }
}
