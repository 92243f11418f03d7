using Accountant.Comparisons;

namespace Accountant.Tests.Comparisons;

public class WinnerTestTests
{
    [Fact]
    public void The_tie_set_holds_the_looks_Holm_cannot_separate_from_the_best()
    {
        // A constructed case on 400 examples. The best (look 1) errs on examples 0..39. Look 2 errs on 2..41
        // (2 discordant each way: exact p = 1). Look 3 errs on 0..29 and 100..129 (10 only-best vs 30 only-look-3:
        // exact p = 0.0022, three rivals ×3 = 0.0067 < 0.05, separated). Look 4 errs on 0..39 and 200..299
        // (100 only-look-4: p ≈ 1.6e-30, separated). Look 5 is voided and look 6 carries only a score: neither is tested.
        var n = 400;
        var looks = new List<ComparableLook>
        {
            new(1, 0.100, McNemarTests.Bits(n, i => i < 40)),
            new(2, 0.100, McNemarTests.Bits(n, i => i is >= 2 and < 42)),
            new(3, 0.150, McNemarTests.Bits(n, i => i < 30 || i is >= 100 and < 130)),
            new(4, 0.350, McNemarTests.Bits(n, i => i < 40 || i is >= 200 and < 300)),
            new(6, 0.090, null),
        };

        var result = WinnerTest.Run(1, looks, higherIsBetter: false, alpha: 0.05);

        Assert.Null(result.Unavailable);
        Assert.Equal(2, result.RunnerUp!.LookB);
        Assert.Equal(1.0, result.RunnerUp.PValue);
        Assert.True(result.RunnerUpTied);
        Assert.Equal([1, 2], result.TiedWithBest);
        Assert.Equal(1, result.WithoutLosses);
        var three = result.Rivals.Single(r => r.Look == 3);
        Assert.Equal(10, three.Comparison.OnlyA);
        Assert.Equal(30, three.Comparison.OnlyB);
        // Holm: the smallest p (look 4) ×3, then look 3's ×2, running maximum; look 3's adjusted value is 2·p₃.
        Assert.Equal(Math.Min(1, 2 * three.Comparison.PValue), three.HolmAdjusted, 12);
        Assert.True(three.HolmAdjusted < 0.05);
    }

    [Fact]
    public void A_clearly_better_winner_is_not_tied()
    {
        var n = 1000;
        var looks = new List<ComparableLook>
        {
            new(1, 0.20, McNemarTests.Bits(n, i => i < 200)),
            new(2, 0.30, McNemarTests.Bits(n, i => i < 300)),
        };
        var result = WinnerTest.Run(1, looks, higherIsBetter: false, alpha: 0.05);
        Assert.False(result.RunnerUpTied);
        Assert.Equal([1], result.TiedWithBest);
    }

    [Fact]
    public void A_best_look_without_losses_makes_the_test_unavailable()
    {
        var result = WinnerTest.Run(1, [new(1, 0.1, null), new(2, 0.2, McNemarTests.Bits(8, i => i < 2))], false, 0.05);
        Assert.NotNull(result.Unavailable);
        Assert.Null(result.RunnerUp);
    }
}
