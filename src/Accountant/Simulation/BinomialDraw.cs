using MathNet.Numerics;

namespace Accountant.Simulation;

/// <summary>
/// Exact Binomial(n, p) draws in constant expected time: the transformed rejection method with squeeze, BTRS
/// (Hörmann 1993, J. Stat. Comput. Simul. 46:101), for n·min(p, 1 − p) ≥ 10, and inversion by the
/// pmf recurrence below that. Checked against MathNet's binomial pmf in the tests.
/// </summary>
public static class BinomialDraw
{
    public static int Sample(FastRandom random, int n, double p)
    {
        if (n <= 0 || p <= 0) return 0;
        if (p >= 1) return n;
        if (p > 0.5) return n - Sample(random, n, 1 - p);
        return n * p < 10 ? Inversion(random, n, p) : Btrs(random, n, p);
    }

    private static int Inversion(FastRandom random, int n, double p)
    {
        // P(0) = q^n, P(k+1) = P(k)·(n − k)/(k + 1)·p/q; walk up the cdf.
        var q = 1 - p;
        var ratio = p / q;
        var pk = Math.Pow(q, n);
        var u = random.NextDouble();
        var k = 0;
        while (u > pk && k < n)
        {
            u -= pk;
            pk *= (n - k) * ratio / (k + 1);
            k++;
        }

        return k;
    }

    private static int Btrs(FastRandom random, int n, double p)
    {
        var q = 1 - p;
        var spq = Math.Sqrt(n * p * q);
        var b = 1.15 + 2.53 * spq;
        var a = -0.0873 + 0.0248 * b + 0.01 * p;
        var c = n * p + 0.5;
        var vr = 0.92 - 4.2 / b;
        var alpha = (2.83 + 5.1 / b) * spq;
        var lpq = Math.Log(p / q);
        var m = Math.Floor((n + 1) * p);
        var h = SpecialFunctions.GammaLn(m + 1) + SpecialFunctions.GammaLn(n - m + 1);
        while (true)
        {
            var u = random.NextDouble() - 0.5;
            var v = random.NextDouble();
            var us = 0.5 - Math.Abs(u);
            var k = Math.Floor((2 * a / us + b) * u + c);
            if (k < 0 || k > n) continue;
            if (us >= 0.07 && v <= vr) return (int)k;
            v = Math.Log(v * alpha / (a / (us * us) + b));
            if (v <= h - SpecialFunctions.GammaLn(k + 1) - SpecialFunctions.GammaLn(n - k + 1) + (k - m) * lpq) return (int)k;
        }
    }
}
