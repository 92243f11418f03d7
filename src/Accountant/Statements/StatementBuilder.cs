using System.Globalization;
using Accountant.Bounds;
using Accountant.Ledger;

namespace Accountant.Statements;

/// <summary>
/// Puts a holdout's looks and the bounds together. M counts every look: every configuration, stage, rerun and
/// voided look. The selected look is the best non-voided one (earliest on ties); the union bound over all M
/// looks holds for every look at once, so it holds for the selected one whichever it is.
/// </summary>
public static class StatementBuilder
{
    public const string HoeffdingReference = "Hoeffding 1963, JASA 58:13; union (Bonferroni) bound over the looks";
    public const string BinomialReference = "Clopper & Pearson 1934, Biometrika 26:404; Langford 2005, JMLR 6:273, with a union bound over the looks";

    public static Statement Build(Holdout holdout, IReadOnlyList<Look> looks, IReadOnlyList<LookVoid> voids, string? chainHead, StatementOptions? options = null)
    {
        var voided = voids.Select(v => v.LookNumber).ToHashSet();
        var tally = new LookTally(looks.Count, looks.Count(l => l.Adaptive), looks.Count(l => !l.HasLosses), SelectBest(holdout.Metric, looks, voided));
        return Build(holdout, tally, voids, chainHead, options);
    }

    /// <summary>The same statement from the counts alone, so that a ledger of a million looks need not be read look by look.</summary>
    public static Statement Build(Holdout holdout, LookTally tally, IReadOnlyList<LookVoid> voids, string? chainHead, StatementOptions? options = null)
    {
        options ??= new StatementOptions();
        Require.Delta(options.Delta);
        Require.Tolerance(options.Tolerance);

        var voided = voids.Select(v => v.LookNumber).ToHashSet();
        var best = tally.Best;
        var m = tally.Looks;
        var bounds = best is null ? [] : BoundsFor(holdout, best.Score, m, options);
        var budget = BudgetFor(holdout, best?.Score, m, options);
        var scoreOnly = tally.ScoreOnly;
        var warnings = Warnings(holdout, m, voided.Count, scoreOnly, best, bounds, budget, options);
        return new Statement(holdout, options, m, tally.Adaptive, voided.Count, scoreOnly, best, bounds, budget, chainHead, warnings, Cautions.All);
    }

    /// <summary>The best non-voided look: lowest loss, or highest accuracy; the earliest wins a tie.</summary>
    public static Look? SelectBest(Metric metric, IReadOnlyList<Look> looks, IReadOnlySet<int> voided)
    {
        Look? best = null;
        foreach (var look in looks)
        {
            if (voided.Contains(look.Number)) continue;
            if (best is null || (metric.HigherIsBetter() ? look.Score > best.Score : look.Score < best.Score))
            {
                best = look;
            }
        }

        return best;
    }

    /// <summary>
    /// The number of errors behind a 0/1 score on n examples. Scores computed from losses are exact multiples of 1/n;
    /// a score given by hand that is not is rounded to the conservative side (more errors for an upper bound).
    /// </summary>
    public static long ErrorCount(double errorRate, long n, bool roundUp)
    {
        var exact = errorRate * n;
        var nearest = Math.Round(exact);
        if (Math.Abs(exact - nearest) <= 1e-9 * Math.Max(1.0, n))
        {
            return (long)nearest;
        }

        return Math.Clamp((long)(roundUp ? Math.Ceiling(exact) : Math.Floor(exact)), 0, n);
    }

    public static IReadOnlyList<BoundLine> BoundsFor(Holdout holdout, double observed, long looks, StatementOptions options)
    {
        var n = holdout.Size;
        var delta = options.Delta;
        var lines = new List<BoundLine>();
        if (holdout.Metric.IsZeroOne())
        {
            var accuracy = holdout.Metric == Metric.Accuracy;
            var error = accuracy ? 1.0 - observed : observed;
            var kUp = ErrorCount(error, n, roundUp: true);
            var kDown = ErrorCount(error, n, roundUp: false);
            var upper = BinomialUnion.Bound(kUp, n, looks, delta, options.Sided).Upper;
            var lower = options.Sided == Sidedness.TwoSided ? BinomialUnion.Bound(kDown, n, looks, delta, options.Sided).Lower : 0.0;
            lines.Add(Line(BinomialUnion.Name, accuracy, observed, new Interval(lower, upper), BinomialReference));
            var hoeffding = HoeffdingUnion.Bound(error, n, looks, delta, LossRange.Unit, options.Sided);
            lines.Add(Line(HoeffdingUnion.Name, accuracy, observed, hoeffding, HoeffdingReference));
        }
        else
        {
            var hoeffding = HoeffdingUnion.Bound(observed, n, looks, delta, holdout.LossRange, options.Sided);
            lines.Add(Line(HoeffdingUnion.Name, false, observed, hoeffding, HoeffdingReference));
        }

        return lines;
    }

    private static BoundLine Line(string method, bool complement, double observed, Interval onLoss, string reference)
    {
        // For accuracy the interval on the error [l, u] becomes [1 − u, 1 − l], and the conservative side is the lower end.
        var (lower, upper) = complement ? (1.0 - onLoss.Upper, 1.0 - onLoss.Lower) : (onLoss.Lower, onLoss.Upper);
        var bound = complement ? lower : upper;
        return new BoundLine(method, bound, Math.Abs(bound - observed), Guarantee: true, lower, upper, reference);
    }

    public static Budget BudgetFor(Holdout holdout, double? bestScore, long looks, StatementOptions options)
    {
        if (holdout.Metric.IsZeroOne() && bestScore is { } score)
        {
            var error = holdout.Metric == Metric.Accuracy ? 1.0 - score : score;
            var k = ErrorCount(error, holdout.Size, roundUp: true);
            return new Budget(options.Tolerance, BinomialUnion.Name, BinomialUnion.MaxLooks(k, holdout.Size, options.Tolerance, options.Delta, options.Sided), looks);
        }

        var width = holdout.Metric.IsZeroOne() ? 1.0 : holdout.LossRange.Width;
        return new Budget(options.Tolerance, HoeffdingUnion.Name, HoeffdingUnion.MaxLooks(holdout.Size, options.Tolerance, options.Delta, width, options.Sided), looks);
    }

    private static List<StatementWarning> Warnings(Holdout holdout, int lookCount, int voided, int scoreOnly, Look? best,
        IReadOnlyList<BoundLine> bounds, Budget budget, StatementOptions options)
    {
        var warnings = new List<StatementWarning>();
        string F(double x) => x.ToString("0.####", CultureInfo.InvariantCulture);
        if (lookCount == 0)
        {
            warnings.Add(new("no-looks", $"holdout '{holdout.Name}' has no looks yet; record one with 'accountant record {holdout.Name} ...'."));
        }
        else if (best is null)
        {
            warnings.Add(new("all-voided", $"every look on holdout '{holdout.Name}' is voided, so there is no selected configuration; the {lookCount} voided looks still count."));
        }

        if (budget.Overused)
        {
            var margin = bounds.Count > 0 ? $" the margin is now {F(bounds[0].Margin)}," : "";
            warnings.Add(budget.MaxLooks == 0
                ? new("holdout-overused", $"even a single look's margin exceeds the tolerance {F(options.Tolerance)} at confidence {F(options.Confidence)} on {holdout.Size} examples:{margin} so this holdout is too small to tell configurations apart to that tolerance; 'accountant plan' gives the size needed.")
                : new("holdout-overused", $"{lookCount} looks exceed the budget of {budget.MaxLooks} at tolerance {F(options.Tolerance)} and confidence {F(options.Confidence)}:{margin} so this holdout can no longer tell configurations apart to that tolerance; collect fresh validation data for further comparisons."));
        }

        if (lookCount == 1)
        {
            warnings.Add(new("single-look", "only one look is recorded, so no correction for comparisons was applied; if other configurations were tried on this holdout, record them too, or the bound is too optimistic."));
        }

        if (scoreOnly > 0)
        {
            warnings.Add(new("score-only-looks", $"{scoreOnly} of {lookCount} looks carry only a score, without per-example losses; the guaranteed bounds still hold, but paired tests and bootstrap methods cannot use those looks (record predictions to enable them)."));
        }

        if (voided > 0)
        {
            warnings.Add(new("voided-looks", $"{voided} voided look(s) cannot be selected but still count toward the {lookCount} looks: a look cannot be taken back."));
        }

        return warnings;
    }
}
