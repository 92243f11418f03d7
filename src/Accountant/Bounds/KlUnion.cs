namespace Accountant.Bounds;

/// <summary>
/// The Chernoff (relative-entropy) bound inverted, with a union bound over M looks (Langford 2005, JMLR 6:273,
/// the "relative entropy" form of the test-set bound): with probability ≥ 1 − δ every look satisfies
/// kl(p̂ ‖ p) ≤ ln(c·M/δ)/n, c = 1 one-sided and 2 two-sided, where kl is the Bernoulli relative entropy.
/// Valid for any loss in [0, 1] (by convexity the Bernoulli case is the worst); for bounded losses in [a, b] it is
/// applied to (loss − a)/(b − a). Looser than the exact binomial inversion for 0/1 losses, tighter than Hoeffding.
/// </summary>
public static class KlUnion
{
    public const string Name = "kl-union";

    /// <summary>kl(p ‖ q) = p·ln(p/q) + (1 − p)·ln((1 − p)/(1 − q)), with 0·ln 0 = 0.</summary>
    public static double Divergence(double p, double q)
    {
        double Term(double a, double b) => a <= 0 ? 0.0 : b <= 0 ? double.PositiveInfinity : a * Math.Log(a / b);
        return Term(p, q) + Term(1 - p, 1 - q);
    }

    /// <summary>The interval on a mean in [0, 1] after observing <paramref name="observed"/> on n examples.</summary>
    public static Interval Bound(double observed, long n, double logLooks, double delta, Sidedness sided = Sidedness.OneSided)
    {
        Require.Size(n);
        Require.Delta(delta);
        var p = Math.Clamp(observed, 0.0, 1.0);
        var budget = (logLooks - Math.Log(delta) + (sided == Sidedness.TwoSided ? Math.Log(2) : 0.0)) / n;
        var upper = Invert(p, budget, p, 1.0);
        var lower = sided == Sidedness.TwoSided ? Invert(p, budget, p, 0.0) : 0.0;
        return new Interval(lower, upper);
    }

    /// <summary>The same on a loss range: the mean is mapped to [0, 1] and back.</summary>
    public static Interval Bound(double observed, long n, double logLooks, double delta, LossRange range, Sidedness sided)
    {
        var unit = Bound((observed - range.Low) / range.Width, n, logLooks, delta, sided);
        return new Interval(range.Low + unit.Lower * range.Width, range.Low + unit.Upper * range.Width);
    }

    /// <summary>The point q between <paramref name="from"/> and <paramref name="toward"/> where kl(p ‖ q) reaches the budget, by bisection.</summary>
    private static double Invert(double p, double budget, double from, double toward)
    {
        if (Divergence(p, toward) <= budget)
        {
            return toward;
        }

        double inside = from, outside = toward;
        for (var i = 0; i < 200; i++)
        {
            var mid = 0.5 * (inside + outside);
            if (mid == inside || mid == outside) break;
            if (Divergence(p, mid) <= budget) inside = mid; else outside = mid;
        }

        return outside; // the conservative end
    }
}
