namespace Accountant.Bounds;

/// <summary>
/// The empirical Bernstein bound (Maurer &amp; Pontil 2009, arXiv 0907.3740, Thm 4) with a union bound over M looks:
/// for n i.i.d. losses in [0, 1] with unbiased sample variance V_n, with probability ≥ 1 − δ,
/// E ≤ mean + sqrt(2·V_n·ln(2/δ)/n) + 7·ln(2/δ)/(3(n − 1)). For losses in [a, b] it is applied to
/// (loss − a)/(b − a), which gives sqrt(2·V_n·L/n) + 7·(b − a)·L/(3(n − 1)) with L = ln(2M/δ) and V_n in the
/// loss's own units. Tighter than Hoeffding when the losses vary little; it needs the per-example losses.
/// </summary>
public static class EmpiricalBernsteinUnion
{
    public const string Name = "empirical-bernstein-union";

    /// <summary>The one-sided margin; the two-sided one uses δ/2.</summary>
    public static double Margin(long n, double sampleVariance, double logLooks, double delta, double width = 1.0, Sidedness sided = Sidedness.OneSided)
    {
        if (n < 2)
        {
            throw AccountantException.BadArguments("the empirical Bernstein bound needs at least two examples.");
        }

        Require.Delta(delta);
        var l = Math.Log(2.0) + logLooks - Math.Log(delta) + (sided == Sidedness.TwoSided ? Math.Log(2.0) : 0.0);
        return Math.Sqrt(2.0 * Math.Max(0.0, sampleVariance) * l / n) + 7.0 * width * l / (3.0 * (n - 1));
    }

    /// <summary>The unbiased sample variance (n − 1 denominator) of the losses, by Welford's method.</summary>
    public static double SampleVariance(IEnumerable<double> losses)
    {
        long count = 0;
        double mean = 0, m2 = 0;
        foreach (var x in losses)
        {
            count++;
            var d = x - mean;
            mean += d / count;
            m2 += d * (x - mean);
        }

        return count < 2 ? 0.0 : m2 / (count - 1);
    }
}
