using Accountant.Bounds;
using MathNet.Numerics.Distributions;

namespace Accountant.Tests.Bounds;

public class BinomialTailTests
{
    // Clopper–Pearson 95% two-sided limits (δ/2 = 0.025 in each tail).
    [Theory]
    // Conover, Practical Nonparametric Statistics (3rd ed.), worked example; also R binom.test: 5/25 → 0.068–0.407.
    [InlineData(5, 25, 0.068, 0.407, 3)]
    // SciPy 1.10.1 (scipy.stats.beta.ppf), per DESIGN.md check values.
    [InlineData(5, 20, 0.08657, 0.49105, 5)]
    [InlineData(0, 20, 0.0, 0.16843, 5)]
    [InlineData(1, 29, 0.00087, 0.17764, 5)]
    public void Two_sided_95_percent_limits_match_published_values(int k, int n, double lower, double upper, int digits)
    {
        Assert.Equal(lower, BinomialTail.Lower(k, n, 0.025), digits);
        Assert.Equal(upper, BinomialTail.Upper(k, n, 0.025), digits);
    }

    [Fact]
    public void Zero_errors_in_100_gives_the_exact_rule_of_three_value()
    {
        // Hanley & Lippman-Hand 1983, JAMA 249:1743: exact one-sided 95% upper limit 1 − 0.05^(1/n); n = 100 → 0.029513.
        Assert.Equal(0.029513, BinomialTail.Upper(0, 100, 0.05), 6);
        Assert.Equal(1 - Math.Pow(0.05, 1.0 / 100), BinomialTail.Upper(0, 100, 0.05), 12);
        // And the rule of three itself (common practice): about 3/n.
        Assert.InRange(BinomialTail.Upper(0, 1000, 0.05), 0.0029, 0.0031);
    }

    [Theory]
    [InlineData(3, 50, 1e-6)]
    [InlineData(100, 1000, 0.05)]
    [InlineData(4999, 10000, 1e-9)]
    [InlineData(1, 7, 0.3)]
    public void Limits_put_exactly_delta_in_the_tail_by_an_independent_binomial_cdf(int k, int n, double delta)
    {
        // Reference: MathNet.Numerics.Distributions.Binomial.CDF, a general-purpose implementation.
        var upper = BinomialTail.Upper(k, n, delta);
        Assert.Equal(delta, Binomial.CDF(upper, n, k), 1e-9 * Math.Max(1, delta * 1e3) + delta * 1e-9);
        var lower = BinomialTail.Lower(k, n, delta);
        Assert.Equal(delta, 1 - Binomial.CDF(lower, n, k - 1), Math.Max(1e-12, delta * 1e-7));
    }

    [Fact]
    public void Limits_agree_with_the_beta_quantile_of_an_independent_library()
    {
        // Reference: MathNet.Numerics.Distributions.Beta.InvCDF; upper = Beta⁻¹(1 − δ; k + 1, n − k).
        foreach (var (k, n) in new[] { (0, 10), (3, 40), (17, 200), (250, 1000) })
        {
            Assert.Equal(Beta.InvCDF(k + 1, n - k, 0.95), BinomialTail.Upper(k, n, 0.05), 7);
            if (k > 0) Assert.Equal(Beta.InvCDF(k, n - k + 1, 0.05), BinomialTail.Lower(k, n, 0.05), 7);
        }
    }

    [Fact]
    public void Edge_counts_give_the_range_ends()
    {
        Assert.Equal(1.0, BinomialTail.Upper(30, 30, 0.05));
        Assert.Equal(0.0, BinomialTail.Lower(0, 30, 0.05));
        Assert.Throws<ArgumentOutOfRangeException>(() => BinomialTail.Upper(31, 30, 0.05));
        Assert.Throws<ArgumentOutOfRangeException>(() => BinomialTail.Upper(1, 30, 0.0));
    }
}
