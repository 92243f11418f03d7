using System.Numerics;
using Accountant.Comparisons;
using MathNet.Numerics.Distributions;

namespace Accountant.Tests.Comparisons;

public class McNemarTests
{
    [Fact]
    public void Exact_and_continuity_corrected_values_match_the_published_worked_example()
    {
        // Armitage & Berry, Statistical Methods in Medical Research (paired proportions): b = 12, c = 2 gives an exact
        // two-sided p of 0.0129, and the continuity-corrected χ² = (|12 − 2| − 1)²/14 = 5.7857 with p = 0.0162 (DESIGN.md).
        Assert.Equal(0.0129, McNemar.ExactPValue(12, 2), 4);
        Assert.Equal(5.7857, McNemar.ContinuityCorrectedChiSquare(12, 2), 4);
        Assert.Equal(0.0162, McNemar.ContinuityCorrectedPValue(12, 2), 4);
        // The test is symmetric in the two classifiers.
        Assert.Equal(McNemar.ExactPValue(12, 2), McNemar.ExactPValue(2, 12), 15);
    }

    [Fact]
    public void Exact_value_for_twelve_against_five_matches_the_check_value()
    {
        // DESIGN.md check value: b = 12, c = 5 → exact two-sided p = 0.1435 (2 · 9402 / 131072 = 0.14346, arithmetic).
        Assert.Equal(0.1435, McNemar.ExactPValue(12, 5), 4);
        Assert.Equal(2.0 * 9402 / 131072, McNemar.ExactPValue(12, 5), 12);
    }

    [Theory]
    [InlineData(0, 0)]
    [InlineData(0, 1)]
    [InlineData(3, 3)]
    [InlineData(7, 30)]
    [InlineData(150, 100)]
    [InlineData(1000, 1100)]
    public void Exact_value_equals_exact_rational_arithmetic_and_MathNet_binomial(long b, long c)
    {
        // Exact reference: 2·Σ_{j ≤ min} C(N, j) / 2^N with BigInteger, capped at 1 (the definition, in exact arithmetic).
        var n = b + c;
        var m = Math.Min(b, c);
        BigInteger sum = 0, binomial = 1;
        for (var j = 0L; j <= m; j++)
        {
            sum += binomial;
            binomial = binomial * (n - j) / (j + 1);
        }

        var exact = n == 0 ? 1.0 : Math.Min(1.0, Math.Exp(BigInteger.Log(2 * sum) - n * Math.Log(2)));
        Assert.Equal(exact, McNemar.ExactPValue(b, c), 1e-10);
        // MathNet.Numerics, a general-purpose library: the same tail from its binomial CDF.
        var mathNet = n == 0 ? 1.0 : Math.Min(1.0, 2 * Binomial.CDF(0.5, (int)n, m));
        Assert.Equal(mathNet, McNemar.ExactPValue(b, c), 1e-9);
    }

    [Theory]
    [InlineData(12, 2)]
    [InlineData(40, 25)]
    [InlineData(500, 430)]
    public void Continuity_corrected_value_equals_MathNet_chi_square(long b, long c)
    {
        var statistic = Math.Pow(Math.Abs(b - c) - 1.0, 2) / (b + c);
        Assert.Equal(statistic, McNemar.ContinuityCorrectedChiSquare(b, c), 12);
        Assert.Equal(1 - ChiSquared.CDF(1, statistic), McNemar.ContinuityCorrectedPValue(b, c), 9);
    }

    [Fact]
    public void Compare_counts_the_discordant_examples_of_two_bitsets()
    {
        // 20 examples; A errs on 0..5, B errs on 4..9: only A on 0..3 (4), only B on 6..9 (4).
        var a = Bits(20, i => i <= 5);
        var b = Bits(20, i => i is >= 4 and <= 9);
        var result = McNemar.Compare(1, 2, a, b);
        Assert.Equal(4, result.OnlyA);
        Assert.Equal(4, result.OnlyB);
        Assert.Equal(1.0, result.PValue);
    }

    internal static byte[] Bits(int n, Func<int, bool> error)
    {
        var bytes = new byte[(n + 7) / 8];
        for (var i = 0; i < n; i++) if (error(i)) bytes[i >> 3] |= (byte)(1 << (i & 7));
        return bytes;
    }
}
