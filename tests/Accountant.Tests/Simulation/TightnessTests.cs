using Accountant.Bounds;
using Accountant.Simulation;

namespace Accountant.Tests.Simulation;

/// <summary>
/// The oracle and the correlation-aware guarantee, on searches simulated example by example (reduced sizes: the README's
/// table is the full-size run). With R = 2,000 repetitions the Monte Carlo standard error of a 95% coverage is
/// sqrt(0.95·0.05/2000) ≈ 0.0049, so every guarantee must cover at least 0.95 − 3·SE ≈ 0.935 of searches.
/// </summary>
public class TightnessTests
{
    private const int Repetitions = 2000;
    private static readonly double Floor = 0.95 - 3 * Math.Sqrt(0.95 * 0.05 / Repetitions);

    private static SimulationResult Run(double correlation, double low, double high, int seed) => SearchSimulator.Run(new SimulationOptions
    {
        HoldoutSize = 2000, Looks = 200, TrueErrorLow = low, TrueErrorHigh = high, Correlation = correlation, PerExample = true,
        Repetitions = Repetitions, Seed = seed,
    });

    private static MethodCoverage Method(SimulationResult result, string name) => result.Methods.Single(m => m.Method == name);

    [Theory]
    [InlineData(0.0, 0.15, 0.25, 1)]   // independent configurations
    [InlineData(0.5, 0.2, 0.2, 2)]
    [InlineData(0.9, 0.2, 0.2, 3)]
    [InlineData(0.99, 0.2, 0.2, 4)]
    [InlineData(0.0, 0.5, 0.5, 5)]     // null data: every configuration equally good (random labels)
    public void Every_guarantee_covers_in_every_scenario(double correlation, double low, double high, int seed)
    {
        var result = Run(correlation, low, high, seed);
        foreach (var method in result.Methods.Where(m => !m.Selection))
        {
            Assert.True(method.Coverage >= Floor, $"{method.Method} at ρ = {correlation} covered {method.Coverage:F4} < {Floor:F4} (SE {method.CoverageStdErr:F4})");
        }

        // The oracle margin is the 95th percentile of the gap: the raw best, with no margin, covers far less often.
        Assert.True(result.OracleMargin > 0);
        Assert.True(result.RawCoverage < 0.5);
        // No guarantee that covers can have a mean margin far below the oracle's (it would have to miss more than 5%).
        Assert.All(result.Methods, m => Assert.True(m.MarginToOracle > 0.8, $"{m.Method}: {m.MarginToOracle}"));
    }

    [Fact]
    public void Correlated_configurations_cost_chained_binomial_less_than_the_union_and_independent_ones_do_not()
    {
        // At ρ = 0.99 the looks share almost all their mistakes: the union bound pays for 200 comparisons, chained-binomial for
        // about one look plus the small increments.
        var correlated = Run(0.99, 0.2, 0.2, 6);
        Assert.True(Method(correlated, ChainedBinomial.Name).MeanMargin < 0.8 * Method(correlated, BinomialUnion.Name).MeanMargin);
        var independent = Run(0.0, 0.15, 0.25, 7);
        Assert.True(Method(independent, BinomialUnion.Name).MeanMargin < Method(independent, ChainedBinomial.Name).MeanMargin);
        // The union bound over independent configurations is close to the oracle (Bonferroni is nearly exact for them).
        Assert.InRange(Method(independent, BinomialUnion.Name).MarginToOracle, 0.9, 1.25);
    }

    [Fact]
    public void The_oracle_is_the_inverse_cdf_quantile_that_mathnet_computes()
    {
        // MathNet's QuantileDefinition.EmpiricalInvCDF (R's type 1) is the ⌈q·R⌉-th order statistic, the definition used here.
        var random = new Random(3);
        foreach (var count in new[] { 1, 7, 20, 1000, 2001 })
        {
            var values = Enumerable.Range(0, count).Select(_ => random.NextDouble() - 0.5).ToList();
            foreach (var q in new[] { 0.5, 0.9, 0.95, 0.99 })
            {
                Assert.Equal(MathNet.Numerics.Statistics.Statistics.QuantileCustom(values, q, MathNet.Numerics.Statistics.QuantileDefinition.EmpiricalInvCDF),
                    SearchSimulator.Quantile(values, q));
            }
        }
    }

    [Fact]
    public void Per_example_losses_have_the_true_error_and_the_stated_correlation()
    {
        // Two looks of equal true error p under correlation ρ: each errs with probability p, and their losses have
        // correlation ρ (they agree on the shared share ρ of the examples, and are independent elsewhere: the covariance is
        // ρ·p(1 − p)). 200,000 examples; tolerances are 5 standard errors.
        const int n = 200_000;
        var draw = new SearchSimulator.LossDraw(n, 2);
        foreach (var rho in new[] { 0.0, 0.5, 0.9 })
        {
            draw.Search(new SimulationOptions { HoldoutSize = n, Looks = 2, TrueErrorLow = 0.3, TrueErrorHigh = 0.3, Correlation = rho, PerExample = true }, FastRandom.For(11, 0));
            var a = Bits(draw.Row(0), n);
            var b = Bits(draw.Row(1), n);
            Assert.Equal(0.3, a.Average(), 5 * Math.Sqrt(0.21 / n));
            Assert.Equal(0.3, b.Average(), 5 * Math.Sqrt(0.21 / n));
            Assert.Equal(draw.Errors[0], (int)a.Sum());
            Assert.Equal(rho, MathNet.Numerics.Statistics.Correlation.Pearson(a, b), 5 / Math.Sqrt(n));
        }
    }

    [Fact]
    public void Per_example_simulation_is_for_fixed_searches_only()
    {
        var error = Assert.Throws<AccountantException>(() => SearchSimulator.Run(new SimulationOptions { PerExample = true, Strategy = AnalystStrategy.Refine }));
        Assert.Equal(ErrorKind.BadArguments, error.Kind);
    }

    private static double[] Bits(Span<ulong> row, int n)
    {
        var values = new double[n];
        for (var i = 0; i < n; i++) values[i] = (row[i >> 6] >> (i & 63)) & 1;
        return values;
    }
}
