using Accountant.Simulation;

namespace Accountant.Tests.Simulation;

/// <summary>
/// Statistical checks of the 95% guarantees on simulated searches with known true errors. With R = 4,000
/// repetitions the Monte Carlo standard error of a coverage near 0.95 is sqrt(0.95·0.05/4000) ≈ 0.0034; each
/// test asserts coverage ≥ 0.95 − 3·SE ≈ 0.940, so a correct 95% bound fails it with probability below 0.2%.
/// (The union bounds are conservative, so their observed coverage is far above 0.95.)
/// </summary>
public class CoverageTests
{
    private const int Repetitions = 4000;
    private static readonly double Floor = 0.95 - 3 * Math.Sqrt(0.95 * 0.05 / Repetitions);

    [Theory]
    [InlineData(500, 50, 1)]
    [InlineData(1000, 200, 2)]
    [InlineData(200, 10, 3)]
    public void Union_bounds_cover_the_selected_configurations_true_error_while_the_raw_best_does_not(int n, int looks, int seed)
    {
        // Configurations with true errors spread over [0.15, 0.25], drawn afresh for each simulated search.
        var result = NonAdaptiveSearchSimulation.Run(n, looks, (random, _) => 0.15 + 0.10 * random.NextDouble(), 0.95, Repetitions, seed);

        Assert.True(result.BinomialCoverage >= Floor, $"binomial-union coverage {result.BinomialCoverage:F4} < {Floor:F4}");
        Assert.True(result.HoeffdingCoverage >= Floor, $"hoeffding-union coverage {result.HoeffdingCoverage:F4} < {Floor:F4}");
        // The raw best validation error is optimistic: it covers far less often than 95%.
        Assert.True(result.RawCoverage < 0.5, $"raw coverage {result.RawCoverage:F4} should be far below 0.95");
        Assert.True(result.MeanObservedBest < result.MeanTrueError);
    }

    [Fact]
    public void On_null_configurations_the_raw_best_is_far_below_one_half_and_the_bounds_still_cover()
    {
        // Every configuration has true error 0.5 (labels independent of features). Cf. Varma & Simon 2006,
        // BMC Bioinformatics 7:91: the minimum error over many configurations falls far below 0.5 on small holdouts.
        var result = NonAdaptiveSearchSimulation.Run(40, 100, (_, _) => 0.5, 0.95, Repetitions, 7);
        Assert.True(result.MeanObservedBest < 0.32, $"mean best {result.MeanObservedBest:F3}");
        Assert.True(result.BinomialCoverage >= Floor);
        Assert.True(result.HoeffdingCoverage >= Floor);
    }
}
