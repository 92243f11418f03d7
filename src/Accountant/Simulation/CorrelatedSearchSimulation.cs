using Accountant.Bounds;
using Accountant.Estimates;

namespace Accountant.Simulation;

/// <summary>
/// Configurations that make nearly the same predictions, with known true errors. Each example is "shared" with
/// probability ρ: then every configuration compares one common uniform U_i with its own true error p_k (so they err
/// together on the hard examples); otherwise each draws its own uniform. Configuration k errs on example i when its
/// uniform is below p_k, so its true error is exactly p_k whatever ρ, and the errors of two configurations with equal
/// p are correlated by about ρ.
/// </summary>
public static class CorrelatedLosses
{
    /// <summary>One holdout's losses for configurations with true errors <paramref name="trueErrors"/>.</summary>
    public static LossMatrix Draw(Random random, IReadOnlyList<double> trueErrors, int n, double correlation)
    {
        var bytes = (n + 7) / 8;
        var rows = trueErrors.Select(_ => new byte[bytes]).ToList();
        for (var i = 0; i < n; i++)
        {
            var shared = random.NextDouble() < correlation;
            var common = random.NextDouble();
            for (var k = 0; k < trueErrors.Count; k++)
            {
                var u = shared ? common : random.NextDouble();
                if (u < trueErrors[k]) rows[k][i >> 3] |= (byte)(1 << (i & 7));
            }
        }

        return LossMatrix.FromBitsets(n, rows);
    }
}

/// <summary>What a Monte Carlo of correlated searches measured for the bootstrap estimates, all on the error scale.</summary>
/// <param name="Repetitions">Simulated searches.</param>
/// <param name="MeanOptimism">Mean of (true error − observed error) of the selected configuration: the raw optimism.</param>
/// <param name="MeanBiasCorrectedGap">Mean of (true error − bootstrap-bias estimate): what the correction leaves.</param>
/// <param name="GapStandardError">Monte Carlo standard error of <paramref name="MeanBiasCorrectedGap"/>.</param>
/// <param name="OptimismStandardError">Monte Carlo standard error of <paramref name="MeanOptimism"/>.</param>
/// <param name="MaxBootstrapCoverage">Fraction of searches where the max-bootstrap bound covered the selected configuration's true error.</param>
/// <param name="SimultaneousCoverage">Fraction where the max-bootstrap bounds covered every configuration's true error at once.</param>
/// <param name="BinomialCoverage">Fraction where the binomial-union bound covered it.</param>
/// <param name="MeanMaxBootstrapMargin">Mean margin of the max-bootstrap bound.</param>
/// <param name="MeanBinomialMargin">Mean margin of the binomial-union bound.</param>
public sealed record BootstrapSimulationResult(
    int Repetitions,
    double MeanOptimism,
    double OptimismStandardError,
    double MeanBiasCorrectedGap,
    double GapStandardError,
    double MaxBootstrapCoverage,
    double SimultaneousCoverage,
    double BinomialCoverage,
    double MeanMaxBootstrapMargin,
    double MeanBinomialMargin);

/// <summary>Simulated non-adaptive searches over correlated configurations, each followed by the bootstrap estimates.</summary>
public static class CorrelatedSearchSimulation
{
    public static BootstrapSimulationResult Run(int n, IReadOnlyList<double> trueErrors, double correlation, double confidence,
        int resamples, int repetitions, int seed)
    {
        var delta = 1 - confidence;
        var k = trueErrors.Count;
        var selectable = Enumerable.Repeat(true, k).ToArray();
        var outcomes = new Outcome[repetitions];
        // Each repetition has its own random stream, so the repetitions can run in parallel and still reproduce.
        Parallel.For(0, repetitions, r =>
        {
            var random = new Random(HashCode.Combine(seed, r));
            var matrix = CorrelatedLosses.Draw(random, trueErrors, n, correlation);
            var best = 0;
            for (var j = 1; j < k; j++) if (matrix.Errors[j] < matrix.Errors[best]) best = j;
            var settings = new BootstrapSettings { Resamples = resamples, Seed = (ulong)(seed * 100_003L + r), Confidence = confidence, MaxThreads = 1 };
            var result = BootstrapEstimates.Run(matrix, selectable, best, settings);
            var observed = matrix.ErrorRate(best);
            var truth = trueErrors[best];
            var all = true;
            for (var j = 0; j < k && all; j++)
            {
                all = matrix.ErrorRate(j) + result.MaxBootstrap.CriticalValue * BootstrapEstimates.StandardError(matrix.ErrorRate(j), n) >= trueErrors[j];
            }

            var binomial = BinomialUnion.Bound(matrix.Errors[best], n, k, delta).Upper;
            outcomes[r] = new Outcome(truth - observed, truth - result.BiasCorrection.Estimate, result.MaxBootstrap.Upper >= truth, all,
                binomial >= truth, result.MaxBootstrap.Upper - observed, binomial - observed);
        });

        double optimism = outcomes.Sum(o => o.Optimism), optimismSquares = outcomes.Sum(o => o.Optimism * o.Optimism);
        double gap = outcomes.Sum(o => o.Gap), gapSquares = outcomes.Sum(o => o.Gap * o.Gap);
        var maxCovered = outcomes.Count(o => o.MaxCovered);
        var simultaneous = outcomes.Count(o => o.AllCovered);
        var binomialCovered = outcomes.Count(o => o.BinomialCovered);
        double maxMargin = outcomes.Sum(o => o.MaxMargin), binomialMargin = outcomes.Sum(o => o.BinomialMargin);
        double R = repetitions;
        double Se(double sum, double squares) => Math.Sqrt(Math.Max(0, squares / R - sum / R * (sum / R)) / R);
        return new BootstrapSimulationResult(repetitions, optimism / R, Se(optimism, optimismSquares), gap / R, Se(gap, gapSquares),
            maxCovered / R, simultaneous / R, binomialCovered / R, maxMargin / R, binomialMargin / R);
    }

    private readonly record struct Outcome(double Optimism, double Gap, bool MaxCovered, bool AllCovered, bool BinomialCovered, double MaxMargin, double BinomialMargin);
}
