namespace Accountant.Bounds;

/// <summary>A confidence interval on a loss (lower is better). One-sided intervals have Lower = the range's low end.</summary>
public readonly record struct Interval(double Lower, double Upper);
