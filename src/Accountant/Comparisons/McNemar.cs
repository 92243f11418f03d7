using MathNet.Numerics;

namespace Accountant.Comparisons;

/// <summary>
/// McNemar's test of two classifiers scored on the same examples (McNemar 1947, Psychometrika 12:153): only the
/// examples where exactly one of them errs carry information. Under the null hypothesis that both have the same
/// error rate, each such discordant example is equally likely to be an error of either, so the count of one kind is
/// Binomial(b + c, 1/2).
/// </summary>
public static class McNemar
{
    /// <summary>
    /// The exact two-sided p-value: 2·P(X ≤ min(b, c)) for X ~ Binomial(b + c, 1/2), capped at 1; 1 when no example
    /// is discordant. Computed from the regularized incomplete beta function, P(X ≤ m) = I_{1/2}(N − m, m + 1),
    /// so that it keeps its precision for hundreds of thousands of discordant examples.
    /// </summary>
    /// <param name="onlyA">Examples where the first classifier errs and the second does not (b).</param>
    /// <param name="onlyB">Examples where the second errs and the first does not (c).</param>
    public static double ExactPValue(long onlyA, long onlyB)
    {
        Check(onlyA, onlyB);
        var total = onlyA + onlyB;
        var smaller = Math.Min(onlyA, onlyB);
        if (total == 0 || 2 * smaller >= total)
        {
            return 1.0;
        }

        var tail = SpecialFunctions.BetaRegularized(total - smaller, smaller + 1, 0.5);
        return Math.Min(1.0, 2.0 * tail);
    }

    /// <summary>
    /// The continuity-corrected statistic (|b − c| − 1)² / (b + c) (Edwards 1948, Psychometrika 13:185), with
    /// |b − c| − 1 floored at 0; 0 when no example is discordant.
    /// </summary>
    public static double ContinuityCorrectedChiSquare(long onlyA, long onlyB)
    {
        Check(onlyA, onlyB);
        var total = onlyA + onlyB;
        if (total == 0)
        {
            return 0.0;
        }

        var excess = Math.Max(0.0, Math.Abs((double)onlyA - onlyB) - 1.0);
        return excess * excess / total;
    }

    /// <summary>The continuity-corrected p-value: P(χ²₁ ≥ statistic) = erfc(sqrt(statistic / 2)).</summary>
    public static double ContinuityCorrectedPValue(long onlyA, long onlyB) =>
        SpecialFunctions.Erfc(Math.Sqrt(ContinuityCorrectedChiSquare(onlyA, onlyB) / 2.0));

    /// <summary>Counts the discordant examples of two 0/1 loss bitsets and runs both forms of the test.</summary>
    public static PairComparison Compare(int lookA, int lookB, ReadOnlySpan<byte> lossesA, ReadOnlySpan<byte> lossesB)
    {
        var (onlyA, onlyB) = Bitsets.Discordant(lossesA, lossesB);
        return new PairComparison(lookA, lookB, onlyA, onlyB, ExactPValue(onlyA, onlyB),
            ContinuityCorrectedChiSquare(onlyA, onlyB), ContinuityCorrectedPValue(onlyA, onlyB));
    }

    private static void Check(long onlyA, long onlyB)
    {
        if (onlyA < 0 || onlyB < 0)
        {
            throw new ArgumentOutOfRangeException(nameof(onlyA), "discordant counts cannot be negative");
        }
    }
}

/// <summary>McNemar's test of look A against look B on the same holdout.</summary>
/// <param name="LookA">The first look's number.</param>
/// <param name="LookB">The second look's number.</param>
/// <param name="OnlyA">Examples only look A gets wrong.</param>
/// <param name="OnlyB">Examples only look B gets wrong.</param>
/// <param name="PValue">Exact two-sided p-value (binomial, p = 1/2, on the discordant examples).</param>
/// <param name="ChiSquare">Continuity-corrected χ² statistic, 1 degree of freedom.</param>
/// <param name="PValueCorrected">The continuity-corrected χ² p-value (the large-sample approximation of <see cref="PValue"/>).</param>
public sealed record PairComparison(int LookA, int LookB, long OnlyA, long OnlyB, double PValue, double ChiSquare, double PValueCorrected)
{
    /// <summary>Examples where exactly one of the two errs.</summary>
    public long Discordant => OnlyA + OnlyB;
}
