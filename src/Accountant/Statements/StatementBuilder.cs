using System.Globalization;
using Accountant.Bounds;
using Accountant.Guards;
using Accountant.Ledger;

namespace Accountant.Statements;

/// <summary>
/// Puts a holdout's looks and the bounds together. M counts every look: every configuration, stage, rerun and
/// voided look. The selected look is the best non-voided one (earliest on ties); a union bound over all M looks holds
/// for every look at once, so it holds for the selected one whichever it is. When some looks were adaptive, the
/// union runs instead over every look that could have been made (<see cref="AdaptiveAccounting"/>): ln M_eff.
/// </summary>
public static class StatementBuilder
{
    public const string HoeffdingReference = "Hoeffding 1963, JASA 58:13; union (Bonferroni) bound over the looks";
    public const string BinomialReference = "Clopper & Pearson 1934, Biometrika 26:404; Langford 2005, JMLR 6:273, with a union bound over the looks";
    public const string KlReference = "Chernoff bound in relative-entropy form, Langford 2005, JMLR 6:273, with a union bound over the looks";
    public const string BernsteinReference = "Maurer & Pontil 2009, arXiv 0907.3740, Thm 4, with a union bound over the looks";
    public const string AucReference = "Agarwal et al. 2005, JMLR 6:393, with a union bound over the looks";
    public const string ReleaseSequenceReference = "union over every look the guards' possible releases could have led to: Dwork et al. 2015, arXiv 1506.02629, Thm 9";
    public const string AdaptiveMethod = "adaptive-transcript";

    public static Statement Build(Holdout holdout, IReadOnlyList<Look> looks, IReadOnlyList<LookVoid> voids, string? chainHead,
        StatementOptions? options = null, StatementInputs? inputs = null)
    {
        var voided = voids.Select(v => v.LookNumber).ToHashSet();
        var adaptive = looks.Count(l => l.Adaptive);
        var pattern = adaptive == 0 ? null : looks.Select(Accounted).ToList();
        var tally = new LookTally(looks.Count, adaptive, looks.Count(l => !l.HasLosses), SelectBest(holdout.Metric, looks, voided), pattern);
        return Build(holdout, tally, voids, chainHead, options, inputs);
    }

    /// <summary>How the adaptive accounting sees a look: its flag and the guard its value went through (exact when none).</summary>
    public static AccountedLook Accounted(Look look) => new(look.Adaptive, look.Release is { } r ? GuardSpec.Parse(r.Guard) : GuardSpec.Exact, look.Release?.Stream);

    /// <summary>The same statement from the counts alone, so that a ledger of a million looks need not be read look by look.</summary>
    public static Statement Build(Holdout holdout, LookTally tally, IReadOnlyList<LookVoid> voids, string? chainHead,
        StatementOptions? options = null, StatementInputs? inputs = null)
    {
        options ??= new StatementOptions();
        inputs ??= StatementInputs.None;
        Require.Delta(options.Delta);
        Require.Tolerance(options.Tolerance);

        var voided = voids.Select(v => v.LookNumber).ToHashSet();
        var best = tally.Best;
        var m = tally.Looks;
        var adaptive = tally.Adaptive;
        if (adaptive > 0 && tally.Pattern is null)
        {
            throw new InvalidOperationException("a tally with adaptive looks must carry their pattern.");
        }

        var space = inputs.Space ?? DefaultSpace(holdout, inputs.Positives);
        var logLooks = m == 0 ? 0.0 : adaptive == 0 ? Math.Log(m) : AdaptiveAccounting.LogEffectiveLooks(tally.Pattern!, space);
        var bounds = best is null ? [] : BoundsFor(holdout, best, logLooks, adaptive > 0, options, inputs);
        var budget = BudgetFor(holdout, best?.Score, logLooks, options, inputs.Positives);
        var scoreOnly = tally.ScoreOnly;
        var unguarded = adaptive > 0 && AdaptiveAccounting.HasUnguardedAdaptivity(tally.Pattern!);
        var warnings = Warnings(holdout, m, voided.Count, scoreOnly, adaptive, unguarded, logLooks, best, bounds, budget, options);
        var openings = inputs.Openings ?? [];
        if (openings.Count > 1)
        {
            warnings.Add(new("test-reopened", $"the sealed test set was opened {openings.Count} times; only the first opening is an untouched estimate, and every later one is another look at data that has already informed a choice."));
        }

        if (openings.Count > 0 && best is not null && best.Number != openings[0].LookNumber && best.Sequence > openings[0].Sequence)
        {
            warnings.Add(new("selected-after-unseal", $"the selected look #{best.Number} was recorded after the test set was opened for look #{openings[0].LookNumber}; a configuration chosen after seeing the test score cannot be judged by that test set."));
        }

        var statement = new Statement(holdout, options, m, adaptive, voided.Count, scoreOnly, logLooks, unguarded, best, bounds, budget, chainHead, warnings, Cautions.All, openings)
        {
            CorrelationNote = inputs.ChainedNote,
            Anchors = inputs.Chained?.Anchors ?? [],
            AnchorUsed = inputs.Chained is { } c && best is not null ? c.Anchors[Chained(c, holdout.Size, options).UpperAnchor] : null,
        };
        return best is null || bounds.Count == 0 ? statement : statement with
        {
            Split = Split(holdout, best, bounds[0], options, inputs),
            EffectiveComparisons = bounds[0].Method == ChainedBinomial.Name ? Effective(holdout, best, bounds[0], inputs.Chained!.Looks, options) : null,
        };
    }

    /// <summary>chained-binomial on the statement's anchors at its confidence and sides (on the error scale).</summary>
    private static ChainedBinomial.Result Chained(ChainedInputs chained, int n, StatementOptions options) =>
        ChainedBinomial.Bound(n, chained.Looks, chained.Counts, chained.Increments, options.Delta, options.Sided);

    /// <summary>
    /// The tightest margin against a single look's: the same family's bound with M = 1 on the selected look's score (the exact
    /// binomial for 0/1 losses, Hoeffding for bounded losses, the AUC bound for AUC), and the rest.
    /// </summary>
    private static MarginSplit Split(Holdout holdout, Look best, BoundLine tightest, StatementOptions options, StatementInputs inputs)
    {
        var one = BoundsFor(holdout, best, 0.0, adaptive: false, options, inputs with { Chained = null });
        var sampling = holdout.Metric.IsZeroOne() ? one.First(l => l.Method == BinomialUnion.Name)
            : holdout.Metric == Metric.Auc ? one[0]
            : one.First(l => l.Method == HoeffdingUnion.Name);
        return new MarginSplit(sampling.Margin, Math.Max(0.0, tightest.Margin - sampling.Margin), sampling.Method);
    }

    private static double? Effective(Holdout holdout, Look best, BoundLine chained, int looks, StatementOptions options)
    {
        var accuracy = holdout.Metric == Metric.Accuracy;
        var errors = ErrorCount(accuracy ? 1.0 - best.Score : best.Score, holdout.Size, roundUp: true);
        var upperOnError = accuracy ? 1.0 - chained.Lower : chained.Upper;
        return ChainedBinomial.EffectiveComparisons(errors, holdout.Size, looks, upperOnError, options.Delta, options.Sided);
    }

    private static ValueSpace DefaultSpace(Holdout holdout, long? positives) => holdout.Metric switch
    {
        Metric.Error or Metric.Accuracy => ValueSpace.ZeroOne(holdout.Size),
        Metric.Auc => ValueSpace.Auc(positives ?? 1, Math.Max(1, holdout.Size - (positives ?? 1))),
        _ => ValueSpace.Bounded(holdout.LossRange.Low, holdout.LossRange.High),
    };

    /// <summary>The best non-voided look: lowest loss, or highest accuracy or AUC; the earliest wins a tie.</summary>
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

    /// <summary>
    /// Every applicable guarantee for the selected look, tightest first. Non-adaptive: binomial-union, kl-union and
    /// hoeffding-union for 0/1 losses; hoeffding-union, kl-union and (with per-example losses) empirical-bernstein-union for
    /// bounded losses; auc-union for AUC. With adaptive looks the union bounds do not hold and are not listed: the
    /// adaptive-transcript method applies the metric's tightest tail (exact binomial, Hoeffding, or the AUC bound) at δ/M_eff.
    /// </summary>
    public static IReadOnlyList<BoundLine> BoundsFor(Holdout holdout, Look best, double logLooks, bool adaptive, StatementOptions options, StatementInputs inputs)
    {
        var n = holdout.Size;
        var delta = options.Delta;
        var sided = options.Sided;
        var observed = best.Score;
        var lines = new List<BoundLine>();
        switch (holdout.Metric)
        {
            case Metric.Error or Metric.Accuracy:
            {
                var accuracy = holdout.Metric == Metric.Accuracy;
                var error = accuracy ? 1.0 - observed : observed;
                var kUp = ErrorCount(error, n, roundUp: true);
                var kDown = ErrorCount(error, n, roundUp: false);
                Interval Binomial() => new(
                    sided == Sidedness.TwoSided ? BinomialUnion.BoundLog(kDown, n, logLooks, delta, sided).Lower : 0.0,
                    BinomialUnion.BoundLog(kUp, n, logLooks, delta, sided).Upper);
                if (adaptive)
                {
                    lines.Add(Line(AdaptiveMethod, accuracy, observed, Binomial(), ReleaseSequenceReference));
                    break;
                }

                lines.Add(Line(BinomialUnion.Name, accuracy, observed, Binomial(), BinomialReference));
                var kl = KlUnion.Bound(kUp / (double)n, n, logLooks, delta, sided);
                var klLow = sided == Sidedness.TwoSided ? KlUnion.Bound(kDown / (double)n, n, logLooks, delta, sided).Lower : 0.0;
                lines.Add(Line(KlUnion.Name, accuracy, observed, new Interval(klLow, kl.Upper), KlReference));
                lines.Add(Line(HoeffdingUnion.Name, accuracy, observed, HoeffdingUnion.BoundLog(error, n, logLooks, delta, LossRange.Unit, sided), HoeffdingReference));
                if (inputs.Chained is { } chained)
                {
                    lines.Add(Line(ChainedBinomial.Name, accuracy, observed, Chained(chained, n, options).Interval, CorrelationAware.Reference));
                }

                break;
            }

            case Metric.Auc:
            {
                var positives = inputs.Positives ?? throw new InvalidOperationException("AUC statements need the number of positives.");
                var margin = AucUnion.Margin(positives, n - positives, logLooks, delta, sided);
                var interval = new Interval(Math.Max(0, observed - margin), sided == Sidedness.TwoSided ? Math.Min(1, observed + margin) : 1.0);
                lines.Add(HigherLine(adaptive ? AdaptiveMethod : AucUnion.Name, observed, interval, adaptive ? ReleaseSequenceReference : AucReference));
                break;
            }

            default:
            {
                var range = holdout.LossRange;
                var hoeffding = HoeffdingUnion.BoundLog(observed, n, logLooks, delta, range, sided);
                if (adaptive)
                {
                    lines.Add(Line(AdaptiveMethod, false, observed, hoeffding, ReleaseSequenceReference));
                    break;
                }

                lines.Add(Line(HoeffdingUnion.Name, false, observed, hoeffding, HoeffdingReference));
                lines.Add(Line(KlUnion.Name, false, observed, KlUnion.Bound(observed, n, logLooks, delta, range, sided), KlReference));
                if (best.LossEncoding == LossEncoding.Float32 && inputs.LossesOf?.Invoke(best) is { } bytes && n >= 2)
                {
                    var vector = new LossVector(LossEncoding.Float32, bytes, observed, n);
                    var variance = EmpiricalBernsteinUnion.SampleVariance(Enumerable.Range(0, n).Select(i => vector[i]));
                    var margin = EmpiricalBernsteinUnion.Margin(n, variance, logLooks, delta, range.Width, sided);
                    var interval = new Interval(sided == Sidedness.TwoSided ? Math.Max(range.Low, observed - margin) : range.Low, Math.Min(range.High, observed + margin));
                    lines.Add(Line(EmpiricalBernsteinUnion.Name, false, observed, interval, BernsteinReference));
                }

                break;
            }
        }

        var ordered = lines.OrderBy(l => l.Margin).ToList();
        ordered[0] = ordered[0] with { Tightest = true };
        return ordered;
    }

    private static BoundLine Line(string method, bool complement, double observed, Interval onLoss, string reference)
    {
        // For accuracy the interval on the error [l, u] becomes [1 − u, 1 − l], and the conservative side is the lower end.
        var (lower, upper) = complement ? (1.0 - onLoss.Upper, 1.0 - onLoss.Lower) : (onLoss.Lower, onLoss.Upper);
        var bound = complement ? lower : upper;
        return new BoundLine(method, bound, Math.Abs(bound - observed), Guarantee: true, lower, upper, reference);
    }

    private static BoundLine HigherLine(string method, double observed, Interval interval, string reference) =>
        new(method, interval.Lower, Math.Abs(observed - interval.Lower), Guarantee: true, interval.Lower, interval.Upper, reference);

    /// <summary>
    /// The budget: the most (effective) looks whose margin stays within the tolerance, by the metric's default method at
    /// the best look's score. Looks used are the effective looks, e^(ln M_eff), saturating.
    /// </summary>
    public static Budget BudgetFor(Holdout holdout, double? bestScore, double logLooks, StatementOptions options, long? positives = null)
    {
        var used = logLooks >= Math.Log(long.MaxValue) ? long.MaxValue : (long)Math.Round(Math.Exp(logLooks));
        if (holdout.Metric.IsZeroOne() && bestScore is { } score)
        {
            var error = holdout.Metric == Metric.Accuracy ? 1.0 - score : score;
            var k = ErrorCount(error, holdout.Size, roundUp: true);
            return new Budget(options.Tolerance, BinomialUnion.Name, BinomialUnion.MaxLooks(k, holdout.Size, options.Tolerance, options.Delta, options.Sided), used);
        }

        if (holdout.Metric == Metric.Auc && positives is { } p)
        {
            return new Budget(options.Tolerance, AucUnion.Name, AucUnion.MaxLooks(p, holdout.Size - p, options.Tolerance, options.Delta, options.Sided), used);
        }

        var width = holdout.Metric.IsZeroOne() || holdout.Metric == Metric.Auc ? 1.0 : holdout.LossRange.Width;
        return new Budget(options.Tolerance, HoeffdingUnion.Name, HoeffdingUnion.MaxLooks(holdout.Size, options.Tolerance, options.Delta, width, options.Sided), used);
    }

    private static List<StatementWarning> Warnings(Holdout holdout, int lookCount, int voided, int scoreOnly, int adaptive, bool unguarded,
        double logLooks, Look? best, IReadOnlyList<BoundLine> bounds, Budget budget, StatementOptions options)
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

        if (unguarded)
        {
            var vacuous = bounds.Count > 0 && (bounds[0].Bound is 0.0 or 1.0 || bounds[0].Margin > 0.25);
            warnings.Add(new("adaptive-unguarded", $"{adaptive} adaptive look(s) were chosen after scores released at full precision, so the accounting must count every sequence of exact scores (ln M_eff = {F(logLooks)}) and the bound is {(vacuous ? "vacuous" : "wide")}; release scores to an adaptive search through a guard (record --guard ladder:0.01 or rounded:2), or fix the configurations in advance."));
        }

        if (budget.Overused)
        {
            var margin = bounds.Count > 0 ? $" the margin is now {F(bounds[0].Margin)}," : "";
            var effective = logLooks < 30 ? Math.Round(Math.Exp(logLooks)).ToString("0", CultureInfo.InvariantCulture) : "10^" + (logLooks / Math.Log(10)).ToString("0.#", CultureInfo.InvariantCulture);
            var counted = adaptive > 0 ? $"{effective} effective looks (from {lookCount} recorded, {adaptive} adaptive)" : $"{lookCount} looks";
            warnings.Add(budget.MaxLooks == 0
                ? new("holdout-overused", $"even a single look's margin exceeds the tolerance {F(options.Tolerance)} at confidence {F(options.Confidence)} on {holdout.Size} examples:{margin} so this holdout is too small to tell configurations apart to that tolerance; 'accountant plan' gives the size needed.")
                : new("holdout-overused", $"{counted} exceed the budget of {budget.MaxLooks} at tolerance {F(options.Tolerance)} and confidence {F(options.Confidence)}:{margin} so this holdout can no longer tell configurations apart to that tolerance; collect fresh validation data for further comparisons."));
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
