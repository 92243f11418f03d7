using Accountant.Bounds;

namespace Accountant.Tests.Bounds;

public class TighterBoundTests
{
    [Theory]
    // KL inversion, δ = 0.05 one-sided, SciPy 1.10.1 check values (DESIGN.md): p̂ = 0.1, n = 1000 → 0.124808; n = 100 → 0.188829.
    [InlineData(0.1, 1000, 0.124808)]
    [InlineData(0.1, 100, 0.188829)]
    public void Kl_inversion_matches_the_check_values(double observed, long n, double expected)
    {
        Assert.Equal(expected, KlUnion.Bound(observed, n, 0.0, 0.05).Upper, 6);
    }

    [Fact]
    public void Kl_inversion_sits_between_the_exact_binomial_and_hoeffding()
    {
        foreach (var (k, n, m) in new[] { (10L, 100L, 1L), (100L, 1000L, 50L), (0L, 200L, 10L), (400L, 1000L, 1000L) })
        {
            var kl = KlUnion.Bound(k / (double)n, n, Math.Log(m), 0.05).Upper;
            Assert.True(kl >= BinomialUnion.Bound(k, n, m, 0.05).Upper - 1e-12);
            Assert.True(kl <= HoeffdingUnion.Bound(k / (double)n, n, m, 0.05, LossRange.Unit).Upper + 1e-12);
            // kl(p̂ ‖ bound) equals the budget ln(M/δ)/n unless clipped at 1.
            Assert.Equal(Math.Log(m / 0.05) / n, KlUnion.Divergence(k / (double)n, kl), 9);
        }
    }

    [Fact]
    public void Empirical_bernstein_matches_the_arithmetic_check_value()
    {
        // Maurer & Pontil 2009, Thm 4, one-sided, ln(2/δ) in both terms; n = 1000, V_n = 0.1, δ = 0.05 → 0.035778 (arithmetic, DESIGN.md).
        Assert.Equal(0.035778, EmpiricalBernsteinUnion.Margin(1000, 0.1, 0.0, 0.05), 6);
        // With M looks the union replaces δ by δ/M.
        Assert.Equal(EmpiricalBernsteinUnion.Margin(1000, 0.1, 0.0, 0.05 / 20), EmpiricalBernsteinUnion.Margin(1000, 0.1, Math.Log(20), 0.05), 12);
    }

    [Fact]
    public void Sample_variance_is_the_unbiased_one()
    {
        // 2, 4, 4, 4, 5, 5, 7, 9: population variance 4 (a textbook example); unbiased 32/7.
        Assert.Equal(32.0 / 7.0, EmpiricalBernsteinUnion.SampleVariance([2, 4, 4, 4, 5, 5, 7, 9]), 12);
        Assert.Equal(MathNet.Numerics.Statistics.Statistics.Variance(new double[] { 0.1, 0.5, 0.25, 0.9 }), EmpiricalBernsteinUnion.SampleVariance([0.1, 0.5, 0.25, 0.9]), 12);
    }

    [Fact]
    public void Auc_margin_matches_the_check_value()
    {
        // Agarwal et al. 2005: m = 100 positives, n = 400 negatives, δ = 0.05, two-sided → sqrt((m+n)·ln(2/δ)/(2mn)) = 0.151840.
        Assert.Equal(0.151840, AucUnion.Margin(100, 400, 0.0, 0.05, Sidedness.TwoSided), 6);
        var max = AucUnion.MaxLooks(100, 400, 0.2, 0.05);
        Assert.True(AucUnion.Margin(100, 400, Math.Log(max), 0.05) <= 0.2);
        Assert.True(AucUnion.Margin(100, 400, Math.Log(max + 1), 0.05) > 0.2);
    }

    [Fact]
    public void Auc_is_the_mann_whitney_statistic_with_ties_counted_half()
    {
        // Hand count: positives scored 0.9, 0.4, 0.4; negatives 0.4, 0.1. Pairs: (0.9>0.4, 0.9>0.1, 0.4=0.4 → ½, 0.4>0.1, 0.4=0.4 → ½, 0.4>0.1) = 5/6.
        var auc = AucUnion.Compute([0.9, 0.4, 0.4, 0.4, 0.1], [true, true, true, false, false]);
        Assert.Equal(5.0 / 6.0, auc, 12);
        Assert.Equal(1.0, AucUnion.Compute([0.2, 0.8], [false, true]));
        Assert.Equal(0.0, AucUnion.Compute([0.2, 0.8], [true, false]));
    }

    [Fact]
    public void Log_forms_agree_with_the_count_forms_and_go_vacuous_when_delta_over_m_underflows()
    {
        Assert.Equal(HoeffdingUnion.Margin(1000, 250, 0.05), HoeffdingUnion.MarginLog(1000, Math.Log(250), 0.05), 12);
        Assert.Equal(BinomialUnion.Bound(80, 1000, 250, 0.05).Upper, BinomialUnion.BoundLog(80, 1000, Math.Log(250), 0.05).Upper, 12);
        Assert.Equal(1.0, BinomialUnion.BoundLog(80, 1000, 5000, 0.05).Upper);
        // DESIGN.md check value for release-sequence counting: n = 10,000, k = 1000 looks, N = 2^20 release sequences, δ = 0.05,
        // two-sided → ε = sqrt((ln(N·k) + ln(2/δ))/(2n)) = 0.03497 (Dwork et al. 2015, Thm 9; arithmetic).
        Assert.Equal(0.03497, HoeffdingUnion.MarginLog(10_000, Math.Log(Math.Pow(2, 20) * 1000), 0.05, 1.0, Sidedness.TwoSided), 5);
    }
}
