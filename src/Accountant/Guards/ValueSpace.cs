namespace Accountant.Guards;

/// <summary>
/// What a single released score can be, for counting release sequences: the metric's range, whether it is a mean of 0/1
/// losses on n examples (n + 1 possible values), an AUC on m positives and n negatives (2mn + 1 values, ties
/// counting one half), or a mean of bounded float losses (counted as 2^64 values, every double).
/// </summary>
public sealed record ValueSpace(double Low, double High, double LogExactValues)
{
    public double Width => High - Low;

    public static ValueSpace ZeroOne(long n) => new(0, 1, Math.Log(n + 1.0));

    public static ValueSpace Auc(long positives, long negatives) => new(0, 1, Math.Log(2.0 * positives * negatives + 1.0));

    public static ValueSpace Bounded(double low, double high) => new(low, high, 64 * Math.Log(2.0));

    /// <summary>The space of a holdout's scores: 0/1 metrics on its size, AUC on its positives and negatives, bounded losses on its range.</summary>
    public static ValueSpace Of(Metric metric, int size, Bounds.LossRange range, Func<long> positives)
    {
        if (metric is Metric.Error or Metric.Accuracy) return ZeroOne(size);
        if (metric != Metric.Auc) return Bounded(range.Low, range.High);
        var p = positives();
        return Auc(p, size - p);
    }

    /// <summary>The number of points of a grid of the given step covering the range (conservatively rounded up).</summary>
    public double GridPoints(double step) => Math.Ceiling(Width / step - 1e-9) + 1;
}
