using MathNet.Numerics;

namespace Accountant.Bounds;

/// <summary>
/// Exact binomial tail inversion: the Clopper–Pearson limits (Clopper &amp; Pearson 1934, Biometrika 26:404),
/// which are Langford's test-set bound (Langford 2005, JMLR 6:273, Thm 3.3) when read as a bound on a true error.
/// </summary>
/// <remarks>
/// The limits are found by bisection on the regularized incomplete beta function
/// (<see cref="SpecialFunctions.BetaRegularized"/>), working on the small tail directly so that tiny
/// δ (δ/M for a million looks) keeps its precision. Bisection runs to the resolution of a double.
/// </remarks>
public static class BinomialTail
{
    /// <summary>
    /// The largest p with P(Bin(n, p) ≤ k) ≥ δ: an upper confidence limit for the success probability
    /// at confidence 1 − δ after observing k successes in n trials. Equals 1 when k = n.
    /// </summary>
    public static double Upper(long k, long n, double delta)
    {
        Check(k, n, delta);
        if (k == n)
        {
            return 1.0;
        }

        // P(X ≤ k | p) = I_{1−p}(n − k, k + 1), decreasing in p.
        return Bisect(k / (double)n, 1.0, p => SpecialFunctions.BetaRegularized(n - k, k + 1, 1.0 - p) - delta, decreasing: true);
    }

    /// <summary>
    /// The smallest p with P(Bin(n, p) ≥ k) ≥ δ: a lower confidence limit at confidence 1 − δ. Equals 0 when k = 0.
    /// </summary>
    public static double Lower(long k, long n, double delta)
    {
        Check(k, n, delta);
        if (k == 0)
        {
            return 0.0;
        }

        // P(X ≥ k | p) = I_p(k, n − k + 1), increasing in p.
        return Bisect(0.0, k / (double)n, p => SpecialFunctions.BetaRegularized(k, n - k + 1, p) - delta, decreasing: false);
    }

    /// <summary>P(Bin(n, p) ≤ k), the lower tail, through the incomplete beta function.</summary>
    public static double LowerTail(long k, long n, double p)
    {
        if (k < 0) return 0.0;
        if (k >= n) return 1.0;
        return SpecialFunctions.BetaRegularized(n - k, k + 1, 1.0 - p);
    }

    private static void Check(long k, long n, double delta)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(n, 1);
        if (k < 0 || k > n)
        {
            throw new ArgumentOutOfRangeException(nameof(k), k, "k must lie in [0, n].");
        }

        if (!(delta > 0.0 && delta < 1.0))
        {
            throw new ArgumentOutOfRangeException(nameof(delta), delta, "δ must lie in (0, 1).");
        }
    }

    private static double Bisect(double lo, double hi, Func<double, double> f, bool decreasing)
    {
        // Invariant: the root lies in [lo, hi]. For a decreasing f, f(lo) ≥ 0 ≥ f(hi).
        for (var i = 0; i < 200; i++)
        {
            var mid = 0.5 * (lo + hi);
            if (mid <= lo || mid >= hi)
            {
                break;
            }

            var value = f(mid);
            var rootAbove = decreasing ? value > 0 : value < 0;
            if (rootAbove)
            {
                lo = mid;
            }
            else
            {
                hi = mid;
            }
        }

        // Return the conservative end: for an upper limit the larger value, for a lower limit the smaller.
        return decreasing ? hi : lo;
    }
}
