namespace Accountant.Bounds;

/// <summary>The declared range [Low, High] a loss is clipped to. 0/1 losses use [0, 1].</summary>
public readonly record struct LossRange
{
    public LossRange(double low, double high)
    {
        if (!double.IsFinite(low) || !double.IsFinite(high) || !(high > low))
        {
            throw AccountantException.BadArguments($"the loss range [{low.ToString(System.Globalization.CultureInfo.InvariantCulture)}, {high.ToString(System.Globalization.CultureInfo.InvariantCulture)}] is not a finite interval with LO < HI; give it as --loss-range LO,HI, for example 0,1.");
        }

        Low = low;
        High = high;
    }

    public double Low { get; }

    public double High { get; }

    /// <summary>High − Low: the factor every distribution-free margin scales with.</summary>
    public double Width => High - Low;

    public static LossRange Unit { get; } = new(0.0, 1.0);

    public double Clip(double value) => Math.Clamp(value, Low, High);
}
