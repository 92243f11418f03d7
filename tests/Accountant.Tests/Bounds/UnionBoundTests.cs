using Accountant.Bounds;

namespace Accountant.Tests.Bounds;

public class UnionBoundTests
{
    [Theory]
    // Hoeffding 1963 (JASA 58:13); arithmetic: ln(40)/0.005 = 737.8 → 738 two-sided; ln(20)/0.005 = 599.1 → 600 one-sided.
    [InlineData(0.05, 0.05, Sidedness.TwoSided, 738)]
    [InlineData(0.05, 0.05, Sidedness.OneSided, 600)]
    // ε = 0.01, δ = 0.05 two-sided: ln(40)/0.0002 = 18,444.4 → 18,445.
    [InlineData(0.01, 0.05, Sidedness.TwoSided, 18445)]
    public void Hoeffding_sample_size_matches_the_arithmetic(double tolerance, double delta, Sidedness sided, long expected)
    {
        Assert.Equal(expected, HoeffdingUnion.SampleSize(1, tolerance, delta, 1.0, sided));
    }

    [Theory]
    // DESIGN.md check values: union margin, n = 1000, δ = 0.05, two-sided.
    [InlineData(1, 0.04295)]
    [InlineData(10, 0.05473)]
    [InlineData(100, 0.06440)]
    [InlineData(1000, 0.07279)]
    [InlineData(10000, 0.08031)]
    public void Hoeffding_union_margin_matches_the_check_values(long looks, double expected)
    {
        Assert.Equal(expected, HoeffdingUnion.Margin(1000, looks, 0.05, 1.0, Sidedness.TwoSided), 5);
    }

    [Theory]
    // n = 1000, observed error 0.10, δ = 0.05, one-sided upper bounds (SciPy 1.10.1 for the binomial; arithmetic for Hoeffding).
    [InlineData(1, 0.1387, 0.1170)]
    [InlineData(10, 0.1515, 0.1269)]
    [InlineData(100, 0.1616, 0.1348)]
    [InlineData(1000, 0.1704, 0.1416)]
    [InlineData(10000, 0.1781, 0.1477)]
    public void Upper_bounds_at_error_ten_percent_match_the_check_values(long looks, double hoeffding, double binomial)
    {
        Assert.Equal(hoeffding, HoeffdingUnion.Bound(0.10, 1000, looks, 0.05, LossRange.Unit).Upper, 4);
        Assert.Equal(binomial, BinomialUnion.Bound(100, 1000, looks, 0.05).Upper, 4);
    }

    [Theory]
    // Langford 2005 test-set bound, values from SciPy 1.10.1: 10/100, δ = 0.05 → 0.16372; with M = 100 → 0.23380.
    [InlineData(1, 0.16372)]
    [InlineData(100, 0.23380)]
    public void Langford_test_set_bound_matches_the_check_values(long looks, double expected)
    {
        Assert.Equal(expected, BinomialUnion.Bound(10, 100, looks, 0.05).Upper, 5);
    }

    [Fact]
    public void Hoeffding_scales_with_the_declared_loss_range()
    {
        var unit = HoeffdingUnion.Margin(500, 20, 0.05, 1.0);
        Assert.Equal(4 * unit, HoeffdingUnion.Margin(500, 20, 0.05, 4.0), 12);
        var bound = HoeffdingUnion.Bound(1.5, 500, 20, 0.05, new LossRange(0, 4));
        Assert.Equal(1.5 + 4 * unit, bound.Upper, 12);
        // Clipped to the range's top.
        Assert.Equal(4.0, HoeffdingUnion.Bound(3.99, 500, 20, 0.05, new LossRange(0, 4)).Upper);
    }

    public static TheoryData<long, long, long> Grid()
    {
        var data = new TheoryData<long, long, long>();
        foreach (var n in new long[] { 50, 200, 1000, 5000 })
        foreach (var m in new long[] { 1, 7, 100, 10000 })
        foreach (var kFraction in new[] { 0, 1, 3, 5 })
        {
            data.Add(n, m, n * kFraction / 10);
        }

        return data;
    }

    [Theory]
    [MemberData(nameof(Grid))]
    public void Binomial_union_is_never_looser_than_hoeffding_union_for_zero_one_loss(long n, long looks, long k)
    {
        foreach (var sided in new[] { Sidedness.OneSided, Sidedness.TwoSided })
        {
            var binomial = BinomialUnion.Bound(k, n, looks, 0.05, sided);
            var hoeffding = HoeffdingUnion.Bound(k / (double)n, n, looks, 0.05, LossRange.Unit, sided);
            Assert.True(binomial.Upper <= hoeffding.Upper + 1e-12, $"upper: binomial {binomial.Upper} > hoeffding {hoeffding.Upper}");
            Assert.True(binomial.Lower >= hoeffding.Lower - 1e-12, $"lower: binomial {binomial.Lower} < hoeffding {hoeffding.Lower}");
        }
    }

    [Theory]
    [MemberData(nameof(Grid))]
    public void Margins_grow_with_looks_and_shrink_with_size(long n, long looks, long k)
    {
        var p = k / (double)n;
        Assert.True(HoeffdingUnion.Margin(n, looks + 1, 0.05) > HoeffdingUnion.Margin(n, looks, 0.05));
        Assert.True(HoeffdingUnion.Margin(2 * n, looks, 0.05) < HoeffdingUnion.Margin(n, looks, 0.05));
        Assert.True(BinomialUnion.Bound(k, n, looks * 2, 0.05).Upper > BinomialUnion.Bound(k, n, looks, 0.05).Upper);
        // Same observed rate on twice the examples: a tighter bound.
        Assert.True(BinomialUnion.Bound(2 * k, 2 * n, looks, 0.05).Upper < BinomialUnion.Bound(k, n, looks, 0.05).Upper);
        Assert.True(p <= BinomialUnion.Bound(k, n, looks, 0.05).Upper);
    }

    [Theory]
    [InlineData(1000, 0.02)]
    [InlineData(1000, 0.05)]
    [InlineData(10000, 0.02)]
    [InlineData(738, 0.05)]
    public void Hoeffding_budget_is_the_closed_form_and_plan_is_its_inverse(long n, double tolerance)
    {
        foreach (var sided in new[] { Sidedness.OneSided, Sidedness.TwoSided })
        {
            var maxLooks = HoeffdingUnion.MaxLooks(n, tolerance, 0.05, 1.0, sided);
            var c = sided == Sidedness.TwoSided ? 2.0 : 1.0;
            // DESIGN.md: M_max = ⌊δ·exp(2nε²)⌋ one-sided (δ/2 two-sided).
            Assert.Equal(Math.Floor(0.05 / c * Math.Exp(2 * n * tolerance * tolerance)), maxLooks);
            if (maxLooks < 1) continue;
            var needed = HoeffdingUnion.SampleSize(maxLooks, tolerance, 0.05, 1.0, sided);
            Assert.True(needed <= n);
            Assert.True(HoeffdingUnion.MaxLooks(needed, tolerance, 0.05, 1.0, sided) >= maxLooks);
            Assert.True(HoeffdingUnion.MaxLooks(needed - 1, tolerance, 0.05, 1.0, sided) < maxLooks);
        }
    }

    [Theory]
    [InlineData(10, 0.05, 0.1)]
    [InlineData(100, 0.02, 0.2)]
    [InlineData(1000, 0.03, 0.05)]
    [InlineData(1, 0.05, 0.0)]
    public void Binomial_plan_and_budget_are_inverses(long looks, double tolerance, double expectedError)
    {
        var n = BinomialUnion.SampleSize(looks, tolerance, 0.05, expectedError);
        var k = (long)Math.Ceiling(expectedError * n - 1e-9);
        Assert.True(BinomialUnion.MaxLooks(k, n, tolerance, 0.05) >= looks);
        Assert.True(BinomialUnion.Margin(k, n, looks, 0.05) <= tolerance);
        // Never more than the distribution-free plan.
        Assert.True(n <= HoeffdingUnion.SampleSize(looks, tolerance, 0.05));
        // The margin one example fewer (at the same rate) does not fit, up to the rounding of the count.
        var kLess = (long)Math.Ceiling(expectedError * (n - 1) - 1e-9);
        Assert.True(BinomialUnion.Margin(kLess, n - 1, looks, 0.05) > tolerance - 2.0 / n);
    }

    [Fact]
    public void Binomial_budget_is_the_largest_count_that_fits()
    {
        var max = BinomialUnion.MaxLooks(100, 1000, 0.04, 0.05);
        Assert.True(BinomialUnion.Margin(100, 1000, max, 0.05) <= 0.04);
        Assert.True(BinomialUnion.Margin(100, 1000, max + 1, 0.05) > 0.04);
        Assert.Equal(0, BinomialUnion.MaxLooks(500, 1000, 0.001, 0.05));
    }
}
