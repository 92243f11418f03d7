namespace Accountant.Bounds;

/// <summary>
/// Hoeffding's inequality (Hoeffding 1963, JASA 58:13, Thm 2) with a union (Bonferroni) bound over M looks,
/// for the mean of n i.i.d. losses bounded in [a, b]:
/// P(|mean − true| ≥ t) ≤ 2·exp(−2nt²/(b − a)²), so with probability ≥ 1 − δ every one of M looks is within
/// (b − a)·sqrt(ln(c·M/δ)/(2n)), where c = 1 one-sided and c = 2 two-sided.
/// </summary>
public static class HoeffdingUnion
{
    public const string Name = "hoeffding-union";

    /// <summary>The margin (b − a)·sqrt(ln(c·M/δ)/(2n)).</summary>
    public static double Margin(long n, long looks, double delta, double width = 1.0, Sidedness sided = Sidedness.OneSided)
    {
        Require.Looks(looks);
        Require.Size(n);
        Require.Delta(delta);
        return width * Math.Sqrt(LogTerm(looks, delta, sided) / (2.0 * n));
    }

    /// <summary>The margin for an effective number of looks given by its logarithm (it may be astronomically large).</summary>
    public static double MarginLog(long n, double logLooks, double delta, double width = 1.0, Sidedness sided = Sidedness.OneSided)
    {
        Require.Size(n);
        Require.Delta(delta);
        return width * Math.Sqrt((logLooks - Math.Log(delta) + (sided == Sidedness.TwoSided ? Math.Log(2.0) : 0.0)) / (2.0 * n));
    }

    /// <summary>The interval for an effective number of looks given by its logarithm, clipped to the loss range.</summary>
    public static Interval BoundLog(double observed, long n, double logLooks, double delta, LossRange range, Sidedness sided = Sidedness.OneSided)
    {
        var margin = MarginLog(n, logLooks, delta, range.Width, sided);
        return new Interval(sided == Sidedness.TwoSided ? Math.Max(range.Low, observed - margin) : range.Low, Math.Min(range.High, observed + margin));
    }

    /// <summary>The interval on the loss mean, clipped to the loss range.</summary>
    public static Interval Bound(double observed, long n, long looks, double delta, LossRange range, Sidedness sided = Sidedness.OneSided)
    {
        var margin = Margin(n, looks, delta, range.Width, sided);
        var upper = Math.Min(range.High, observed + margin);
        var lower = sided == Sidedness.TwoSided ? Math.Max(range.Low, observed - margin) : range.Low;
        return new Interval(lower, upper);
    }

    /// <summary>
    /// The most looks whose margin stays within ε: M_max = ⌊(δ/c)·exp(2nε²/(b − a)²)⌋, saturating at <see cref="long.MaxValue"/>.
    /// </summary>
    public static long MaxLooks(long n, double tolerance, double delta, double width = 1.0, Sidedness sided = Sidedness.OneSided)
    {
        Require.Size(n);
        Require.Tolerance(tolerance);
        Require.Delta(delta);
        var c = sided == Sidedness.TwoSided ? 2.0 : 1.0;
        var logM = Math.Log(delta / c) + 2.0 * n * tolerance * tolerance / (width * width);
        if (logM >= Math.Log(long.MaxValue))
        {
            return long.MaxValue;
        }

        var m = (long)Math.Floor(Math.Exp(logM));
        // Guard against rounding at the boundary: the returned M must satisfy the margin, M + 1 must not.
        while (m >= 1 && Margin(n, m, delta, width, sided) > tolerance) m--;
        while (m < long.MaxValue && Margin(n, m + 1, delta, width, sided) <= tolerance) m++;
        return Math.Max(0, m);
    }

    /// <summary>The holdout size needed for M looks at tolerance ε: n = ⌈(b − a)²·ln(c·M/δ)/(2ε²)⌉.</summary>
    public static long SampleSize(long looks, double tolerance, double delta, double width = 1.0, Sidedness sided = Sidedness.OneSided)
    {
        Require.Looks(looks);
        Require.Tolerance(tolerance);
        Require.Delta(delta);
        var n = (long)Math.Ceiling(width * width * LogTerm(looks, delta, sided) / (2.0 * tolerance * tolerance));
        n = Math.Max(1, n);
        while (n > 1 && Margin(n - 1, looks, delta, width, sided) <= tolerance) n--;
        while (Margin(n, looks, delta, width, sided) > tolerance) n++;
        return n;
    }

    private static double LogTerm(long looks, double delta, Sidedness sided) =>
        Math.Log(looks) - Math.Log(delta) + (sided == Sidedness.TwoSided ? Math.Log(2.0) : 0.0);
}
