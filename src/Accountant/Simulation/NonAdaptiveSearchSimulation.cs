using Accountant.Bounds;
using MathNet.Numerics.Distributions;

namespace Accountant.Simulation;

/// <summary>What a Monte Carlo of searches with known truth measured, for the raw best and for each bound.</summary>
/// <param name="Repetitions">The number of simulated searches.</param>
/// <param name="MeanObservedBest">Mean of the selected look's validation error.</param>
/// <param name="MeanTrueError">Mean of the selected configuration's true error.</param>
/// <param name="RawCoverage">Fraction of searches where the raw best validation error was at least the true error.</param>
/// <param name="BinomialCoverage">Fraction where the binomial-union upper bound was at least the true error.</param>
/// <param name="HoeffdingCoverage">Fraction where the hoeffding-union upper bound was at least the true error.</param>
public sealed record CoverageResult(
    int Repetitions,
    double MeanObservedBest,
    double MeanTrueError,
    double RawCoverage,
    double BinomialCoverage,
    double HoeffdingCoverage)
{
    /// <summary>The binomial standard error of a coverage estimate p over these repetitions: sqrt(p(1 − p)/R).</summary>
    public double StandardError(double coverage) => Math.Sqrt(coverage * (1 - coverage) / Repetitions);
}

/// <summary>
/// Simulates non-adaptive searches: M configurations fixed in advance, each with a known true error, scored on a
/// holdout of n i.i.d. examples (the error count of each drawn from Binomial(n, p_i)); the search selects the lowest
/// count and the bounds are computed for that selection. Error counts are drawn from the binomial directly rather
/// than example by example; for independent configurations this is exact.
/// </summary>
public static class NonAdaptiveSearchSimulation
{
    public static CoverageResult Run(int n, int looks, Func<Random, int, double> trueError, double confidence, int repetitions, int seed)
    {
        var random = new Random(seed);
        var delta = 1 - confidence;
        var trueErrors = new double[looks];
        double sumObserved = 0, sumTrue = 0;
        int raw = 0, binomial = 0, hoeffding = 0;
        // The bound depends on the selected count only, so cache it per count.
        var binomialUpper = new double?[n + 1];
        var hoeffdingMargin = HoeffdingUnion.Margin(n, looks, delta);
        for (var r = 0; r < repetitions; r++)
        {
            var bestCount = int.MaxValue;
            var bestTrue = 0.0;
            for (var i = 0; i < looks; i++)
            {
                trueErrors[i] = trueError(random, i);
                var count = Binomial.Sample(random, trueErrors[i], n);
                if (count < bestCount)
                {
                    bestCount = count;
                    bestTrue = trueErrors[i];
                }
            }

            var observed = bestCount / (double)n;
            sumObserved += observed;
            sumTrue += bestTrue;
            if (observed >= bestTrue) raw++;
            binomialUpper[bestCount] ??= BinomialUnion.Bound(bestCount, n, looks, delta).Upper;
            if (binomialUpper[bestCount] >= bestTrue) binomial++;
            if (observed + hoeffdingMargin >= bestTrue) hoeffding++;
        }

        return new CoverageResult(repetitions, sumObserved / repetitions, sumTrue / repetitions,
            raw / (double)repetitions, binomial / (double)repetitions, hoeffding / (double)repetitions);
    }
}
