using Accountant.Simulation;
using MathNet.Numerics.Distributions;

namespace Accountant.Tests.Simulation;

public class BinomialDrawTests
{
    [Theory]
    [InlineData(10_000, 0.2)]
    [InlineData(1000, 0.5)]
    [InlineData(30, 0.1)]
    [InlineData(1000, 0.999)]
    [InlineData(200, 0.03)]
    public void Draws_follow_the_binomial_distribution(int n, double p)
    {
        // Pearson's chi-square against MathNet's binomial pmf over cells holding at least 20 expected draws (pooled tails).
        const int draws = 200_000;
        var random = new FastRandom(42);
        var counts = new int[n + 1];
        for (var i = 0; i < draws; i++) counts[BinomialDraw.Sample(random, n, p)]++;
        double chi = 0;
        var cells = 0;
        double pendingExpected = 0, pendingObserved = 0;
        for (var k = 0; k <= n; k++)
        {
            pendingExpected += draws * Binomial.PMF(p, n, k);
            pendingObserved += counts[k];
            if (pendingExpected >= 20)
            {
                chi += (pendingObserved - pendingExpected) * (pendingObserved - pendingExpected) / pendingExpected;
                cells++;
                pendingExpected = pendingObserved = 0;
            }
        }

        // The 99.9% quantile of χ² with (cells − 1) degrees of freedom (MathNet), so a correct sampler fails 1 time in 1,000.
        var limit = ChiSquared.InvCDF(Math.Max(1, cells - 1), 0.999);
        Assert.True(chi < limit, $"χ² = {chi:F1} over {cells} cells, limit {limit:F1}");
        Assert.Equal(n * p, counts.Select((c, k) => (double)c * k).Sum() / draws, 5 * Math.Sqrt(n * p * (1 - p) / draws) + 1e-9);
    }
}
