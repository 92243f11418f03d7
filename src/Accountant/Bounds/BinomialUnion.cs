namespace Accountant.Bounds;

/// <summary>
/// The exact binomial tail inversion at δ/M: Langford's test-set bound (Langford 2005, JMLR 6:273, Thm 3.3)
/// with a union (Bonferroni) bound over M looks; the Clopper–Pearson limits (1934) at confidence 1 − δ/M.
/// For 0/1 losses only. This is the tightest distribution-free bound given only the error count of each look.
/// </summary>
public static class BinomialUnion
{
    public const string Name = "binomial-union";

    /// <summary>The interval on the true error after k errors in n examples, with M looks compared.</summary>
    public static Interval Bound(long errors, long n, long looks, double delta, Sidedness sided = Sidedness.OneSided)
    {
        Require.Looks(looks);
        Require.Delta(delta);
        var perLook = delta / looks;
        if (sided == Sidedness.OneSided)
        {
            return new Interval(0.0, BinomialTail.Upper(errors, n, perLook));
        }

        return new Interval(BinomialTail.Lower(errors, n, perLook / 2.0), BinomialTail.Upper(errors, n, perLook / 2.0));
    }

    /// <summary>
    /// The interval for an effective number of looks given by its logarithm. When δ/M underflows a double
    /// (ln M above about 700) the bound is the whole range: the accounting has made it vacuous.
    /// </summary>
    public static Interval BoundLog(long errors, long n, double logLooks, double delta, Sidedness sided = Sidedness.OneSided)
    {
        Require.Delta(delta);
        var logPerSide = Math.Log(delta) - logLooks - (sided == Sidedness.TwoSided ? Math.Log(2.0) : 0.0);
        if (logPerSide < -700)
        {
            return new Interval(0.0, 1.0);
        }

        var perSide = Math.Exp(logPerSide);
        return new Interval(sided == Sidedness.TwoSided ? BinomialTail.Lower(errors, n, perSide) : 0.0, BinomialTail.Upper(errors, n, perSide));
    }

    /// <summary>Upper limit minus the observed error k/n (one-sided), or the larger half-width (two-sided).</summary>
    public static double Margin(long errors, long n, long looks, double delta, Sidedness sided = Sidedness.OneSided)
    {
        var interval = Bound(errors, n, looks, delta, sided);
        var observed = errors / (double)n;
        return Math.Max(interval.Upper - observed, sided == Sidedness.TwoSided ? observed - interval.Lower : 0.0);
    }

    /// <summary>
    /// The most looks whose margin at this error count stays within ε (0 when even one look exceeds it),
    /// saturating at <see cref="long.MaxValue"/>. The margin grows with M, so this is found by doubling and bisection.
    /// </summary>
    public static long MaxLooks(long errors, long n, double tolerance, double delta, Sidedness sided = Sidedness.OneSided)
    {
        Require.Tolerance(tolerance);
        Require.Delta(delta);
        bool Fits(long m) => Margin(errors, n, m, delta, sided) <= tolerance;
        if (!Fits(1))
        {
            return 0;
        }

        long lo = 1, hi = 2;
        while (Fits(hi))
        {
            lo = hi;
            if (hi > long.MaxValue / 2)
            {
                return long.MaxValue;
            }

            hi *= 2;
        }

        // Fits(lo) and !Fits(hi).
        while (hi - lo > 1)
        {
            var mid = lo + (hi - lo) / 2;
            if (Fits(mid)) lo = mid; else hi = mid;
        }

        return lo;
    }

    /// <summary>
    /// The smallest holdout size n at which an expected error rate p, observed as ⌈p·n⌉ errors, has a margin within ε
    /// for M looks. Found by bisection below the Hoeffding size (the exact bound is never looser), then stepped
    /// forward until the margin fits, since the error count's rounding makes the margin only nearly monotone in n.
    /// </summary>
    public static long SampleSize(long looks, double tolerance, double delta, double expectedError, Sidedness sided = Sidedness.OneSided)
    {
        Require.Looks(looks);
        Require.Tolerance(tolerance);
        Require.Delta(delta);
        if (!(expectedError >= 0.0 && expectedError <= 1.0))
        {
            throw AccountantException.BadArguments($"the expected error {expectedError.ToString(System.Globalization.CultureInfo.InvariantCulture)} is not in [0, 1]; give --error as a rate such as 0.1.");
        }

        bool Fits(long n)
        {
            var k = Math.Min(n, (long)Math.Ceiling(expectedError * n - 1e-9));
            return Margin(k, n, looks, delta, sided) <= tolerance;
        }

        long hi = HoeffdingUnion.SampleSize(looks, tolerance, delta, 1.0, sided);
        long lo = 0; // Fits(lo) is false by convention (no examples).
        while (hi - lo > 1)
        {
            var mid = lo + (hi - lo) / 2;
            if (Fits(mid)) hi = mid; else lo = mid;
        }

        while (!Fits(hi)) hi++;
        return hi;
    }
}
