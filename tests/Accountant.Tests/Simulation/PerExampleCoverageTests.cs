using Accountant.Bounds;
using MathNet.Numerics;
using MathNet.Numerics.Distributions;

namespace Accountant.Tests.Simulation;

/// <summary>
/// Coverage of the guarantees that need more than error counts, simulated example by example. R = 2,000
/// repetitions: the Monte Carlo standard error of a coverage of 0.95 is sqrt(0.95·0.05/2000) ≈ 0.0049; the
/// assertions use 0.95 − 3·SE ≈ 0.935.
/// </summary>
public class PerExampleCoverageTests
{
    private const int Repetitions = 2000;
    private static readonly double Floor = 0.95 - 3 * Math.Sqrt(0.95 * 0.05 / Repetitions);

    [Fact]
    public void Empirical_bernstein_union_covers_the_selected_configurations_true_mean_loss()
    {
        // Losses c_j·U³ with U uniform on [0, 1]: in [0, 1], true mean c_j/4 (E[U³] = 1/4), and small variance.
        const int n = 300, looks = 20;
        var random = new Random(12);
        var covered = 0;
        var losses = new double[n];
        for (var r = 0; r < Repetitions; r++)
        {
            double bestMean = double.MaxValue, bestTrue = 0, bestVariance = 0;
            for (var j = 0; j < looks; j++)
            {
                var c = 0.4 + 0.4 * random.NextDouble();
                for (var i = 0; i < n; i++) losses[i] = c * Math.Pow(random.NextDouble(), 3);
                var mean = losses.Average();
                if (mean < bestMean)
                {
                    bestMean = mean;
                    bestTrue = c / 4;
                    bestVariance = EmpiricalBernsteinUnion.SampleVariance(losses);
                }
            }

            if (bestMean + EmpiricalBernsteinUnion.Margin(n, bestVariance, Math.Log(looks), 0.05) >= bestTrue) covered++;
        }

        Assert.True(covered / (double)Repetitions >= Floor, $"coverage {covered / (double)Repetitions:F4}");
    }

    [Fact]
    public void Auc_union_covers_the_selected_configurations_true_auc()
    {
        // Scores N(μ_j, 1) for positives and N(0, 1) for negatives: true AUC = Φ(μ_j/√2).
        const int positives = 50, negatives = 150, looks = 20;
        var random = new Random(13);
        var covered = 0;
        var scores = new double[positives + negatives];
        var labels = Enumerable.Range(0, positives + negatives).Select(i => i < positives).ToArray();
        for (var r = 0; r < Repetitions; r++)
        {
            double bestAuc = double.MinValue, bestTrue = 0;
            for (var j = 0; j < looks; j++)
            {
                var mu = 0.5 + 0.5 * random.NextDouble();
                for (var i = 0; i < scores.Length; i++) scores[i] = Normal.Sample(random, labels[i] ? mu : 0.0, 1.0);
                var auc = AucUnion.Compute(scores, labels);
                if (auc > bestAuc)
                {
                    bestAuc = auc;
                    bestTrue = Normal.CDF(0, 1, mu / Constants.Sqrt2);
                }
            }

            if (bestAuc - AucUnion.Margin(positives, negatives, Math.Log(looks), 0.05) <= bestTrue) covered++;
        }

        Assert.True(covered / (double)Repetitions >= Floor, $"coverage {covered / (double)Repetitions:F4}");
    }
}
