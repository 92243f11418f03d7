using Accountant.Bounds;

namespace Accountant.Estimates;

/// <summary>How the bootstrap estimates are drawn. B resamples with a seed, so a statement can be reproduced.</summary>
public sealed record BootstrapSettings
{
    /// <summary>The default number of resamples, B.</summary>
    public const int DefaultResamples = 1000;

    /// <summary>The default seed: statements are reproducible unless another seed is asked for.</summary>
    public const ulong DefaultSeed = 1;

    public int Resamples { get; init; } = DefaultResamples;

    public ulong Seed { get; init; } = DefaultSeed;

    public double Confidence { get; init; } = 0.95;

    public Sidedness Sided { get; init; } = Sidedness.OneSided;

    /// <summary>At most this many threads (null: all cores).</summary>
    public int? MaxThreads { get; init; }
}

/// <summary>
/// Bootstrap bias correction of the selected configuration's error (BBC; Tsamardinos, Greasidou &amp; Borboudakis 2018,
/// Mach. Learn. 107:1895, applied to holdout predictions): in each resample, select the look with the lowest in-bag
/// error and score it on the out-of-bag examples; the mean of those scores is the corrected error, and their
/// percentiles give the interval.
/// </summary>
/// <param name="Estimate">The mean out-of-bag error of the looks the resamples selected.</param>
/// <param name="Lower">The lower percentile end (δ/2 two-sided; 0 one-sided).</param>
/// <param name="Upper">The upper percentile end (1 − δ/2 two-sided; 1 − δ one-sided).</param>
/// <param name="Resamples">Resamples that had out-of-bag examples (all of them unless n is tiny).</param>
public sealed record BiasCorrection(double Estimate, double Lower, double Upper, int Resamples);

/// <summary>
/// The single-step max-statistic bootstrap (Westfall &amp; Young 1993, Resampling-Based Multiple Testing, Wiley;
/// Romano &amp; Wolf 2005, Econometrica 73:1237): the (1 − δ) quantile c of max_k (ê_k − ê*_k)/σ*_k over the resamples (σ*_k the resample's own standard error, studentized as in Romano &amp; Wolf)
/// gives the simultaneous bound ê_k + c·σ_k for every look at once (two-sided: |ê_k − ê*_k| and ê_k ± c·σ_k).
/// It adapts to correlated configurations, and its coverage is asymptotic, not guaranteed.
/// </summary>
/// <param name="CriticalValue">c, in standard errors.</param>
/// <param name="Lower">The selected look's lower end (two-sided; 0 one-sided).</param>
/// <param name="Upper">The selected look's upper end.</param>
/// <param name="StandardError">σ of the selected look: sqrt(max(ê(1 − ê), 1/n)/n).</param>
public sealed record MaxStatisticBound(double CriticalValue, double Lower, double Upper, double StandardError);

/// <summary>Both estimates for one selected look, on the error scale.</summary>
public sealed record BootstrapResult(BiasCorrection BiasCorrection, MaxStatisticBound MaxBootstrap, int Looks, int Resamples, ulong Seed);

public static class BootstrapEstimates
{
    /// <summary>
    /// Runs the bootstrap on <paramref name="matrix"/> and computes both estimates for row <paramref name="selectedRow"/>.
    /// The max statistic runs over every row (every look with losses, voided ones too: they were looked at);
    /// the bias correction selects among the rows marked <paramref name="selectable"/>.
    /// </summary>
    public static BootstrapResult Run(LossMatrix matrix, bool[] selectable, int selectedRow, BootstrapSettings settings)
    {
        ArgumentNullException.ThrowIfNull(settings);
        ArgumentOutOfRangeException.ThrowIfLessThan(settings.Resamples, 1);
        var delta = 1.0 - settings.Confidence;
        var draws = BootstrapEngine.Run(matrix, settings.Resamples, settings.Seed, selectable, maxThreads: settings.MaxThreads);
        return new BootstrapResult(BiasCorrected(draws, delta, settings.Sided), MaxStatistic(matrix, draws, selectedRow, delta, settings.Sided),
            matrix.Rows, settings.Resamples, settings.Seed);
    }

    /// <summary>The BBC estimate and percentile interval from the out-of-bag scores of the selected looks.</summary>
    public static BiasCorrection BiasCorrected(BootstrapDraws draws, double delta, Sidedness sided)
    {
        var scores = new List<double>(draws.Resamples);
        for (var b = 0; b < draws.Resamples; b++)
        {
            if (draws.Selected[b] >= 0 && draws.OutOfBagSize[b] > 0) scores.Add(draws.OutOfBagErrors[b] / (double)draws.OutOfBagSize[b]);
        }

        if (scores.Count == 0)
        {
            return new BiasCorrection(double.NaN, double.NaN, double.NaN, 0);
        }

        scores.Sort();
        var mean = scores.Average();
        return sided == Sidedness.TwoSided
            ? new BiasCorrection(mean, Quantile(scores, delta / 2), Quantile(scores, 1 - delta / 2), scores.Count)
            : new BiasCorrection(mean, 0.0, Quantile(scores, 1 - delta), scores.Count);
    }

    /// <summary>The standard error used to standardize look k: sqrt(max(ê(1 − ê), 1/n)/n), floored so that a look with no errors still has a scale.</summary>
    public static double StandardError(double error, int n) => Math.Sqrt(Math.Max(error * (1 - error), 1.0 / n) / n);

    /// <summary>The max-statistic critical value and the selected look's simultaneous bound.</summary>
    public static MaxStatisticBound MaxStatistic(LossMatrix matrix, BootstrapDraws draws, int selectedRow, double delta, Sidedness sided)
    {
        var k = matrix.Rows;
        var n = matrix.Size;
        var observed = new double[k];
        for (var j = 0; j < k; j++) observed[j] = matrix.ErrorRate(j);

        var maxima = new double[draws.Resamples];
        var twoSided = sided == Sidedness.TwoSided;
        Parallel.For(0, draws.Resamples, b =>
        {
            var row = draws.Sums.AsSpan(b * k, k);
            var max = double.NegativeInfinity;
            for (var j = 0; j < k; j++)
            {
                // Studentized (the bootstrap-t root): each resample's deviation is divided by that resample's own standard error,
                // so the skewness of a binomial proportion near 0 is carried into the critical value.
                var resampled = row[j] / (double)n;
                var deviation = (observed[j] - resampled) / StandardError(resampled, n);
                if (twoSided) deviation = Math.Abs(deviation);
                if (deviation > max) max = deviation;
            }

            maxima[b] = max;
        });
        Array.Sort(maxima);
        var c = Math.Max(0.0, Quantile(maxima, 1 - delta));
        var e = observed[selectedRow];
        var se = StandardError(e, n);
        return new MaxStatisticBound(c, twoSided ? Math.Max(0.0, e - c * se) : 0.0, Math.Min(1.0, e + c * se), se);
    }

    /// <summary>
    /// The empirical quantile of sorted values: the smallest value whose empirical distribution function reaches q
    /// (the inverse of the empirical CDF, type 1 of Hyndman &amp; Fan 1996, Am. Stat. 50:361).
    /// </summary>
    public static double Quantile(IReadOnlyList<double> sorted, double q)
    {
        // The small allowance keeps 0.95·1000 at index 950 despite the binary representation of 0.95.
        var index = (int)Math.Ceiling(q * sorted.Count - 1e-9) - 1;
        return sorted[Math.Clamp(index, 0, sorted.Count - 1)];
    }
}
