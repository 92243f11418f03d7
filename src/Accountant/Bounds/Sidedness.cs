namespace Accountant.Bounds;

/// <summary>Whether a bound is one-sided (on the conservative side only) or two-sided.</summary>
public enum Sidedness
{
    /// <summary>The conservative side only: an upper bound on an error, a lower bound on an accuracy. All of δ goes to that side.</summary>
    OneSided,
    /// <summary>Both sides, δ/2 each.</summary>
    TwoSided,
}
