using Accountant.Guards;

namespace Accountant.Tests.Guards;

public class GuardTests
{
    private static readonly ValueSpace Unit = ValueSpace.ZeroOne(1000);

    [Fact]
    public void The_ladder_releases_a_new_best_only_past_one_step_rounded_to_the_step()
    {
        // Worked by hand from Blum & Hardt 2015, Alg. 1 with η = 0.01:
        // 0.30 (first) → 0.30; 0.295 is not below 0.29 → 0.30; 0.28 < 0.29 → 0.28; 0.285 → 0.28;
        // 0.2651 < 0.27 → [0.2651]_0.01 = 0.27; 0.25 < 0.26 → 0.25.
        var spec = GuardSpec.Parse("ladder:0.01");
        var scores = new[] { 0.30, 0.295, 0.28, 0.285, 0.2651, 0.25 };
        var state = GuardState.Empty;
        var released = new List<double>();
        foreach (var score in scores)
        {
            var release = Guard.Apply(spec, state, score, Unit, higherIsBetter: false);
            released.Add(release.Value!.Value);
            state = new GuardState(state.Releases + 1, state.HoldoutAnswers + 1, release.Value);
        }

        Assert.Equal([0.30, 0.30, 0.28, 0.28, 0.27, 0.25], released);
        // For accuracy (higher is better) the ladder climbs instead.
        var up = Guard.Apply(spec, new GuardState(1, 1, 0.80), 0.805, Unit, higherIsBetter: true);
        Assert.Equal(0.80, up.Value);
        Assert.Equal(0.82, Guard.Apply(spec, new GuardState(1, 1, 0.80), 0.8170, Unit, higherIsBetter: true).Value!.Value, 12);
    }

    [Theory]
    [InlineData(0.25, 4)]
    [InlineData(0.2, 5)]
    [InlineData(0.1, 3)]
    public void The_ladder_count_covers_every_sequence_the_ladder_can_emit(double step, int releases)
    {
        // Brute force: run the Ladder on every sequence of scores from a grid of 0.05 and collect the distinct release sequences.
        var grid = Enumerable.Range(0, 21).Select(i => i * 0.05).ToArray();
        var spec = GuardSpec.Ladder(step);
        var seen = new HashSet<string>();
        var indices = new int[releases];
        while (true)
        {
            var state = GuardState.Empty;
            var key = new System.Text.StringBuilder();
            foreach (var i in indices)
            {
                var value = Guard.Apply(spec, state, grid[i], ValueSpace.ZeroOne(20), false).Value!.Value;
                key.Append(value.ToString("R", System.Globalization.CultureInfo.InvariantCulture)).Append(';');
                state = new GuardState(state.Releases + 1, state.HoldoutAnswers, value);
            }

            seen.Add(key.ToString());
            var p = releases - 1;
            while (p >= 0 && ++indices[p] == grid.Length) indices[p--] = 0;
            if (p < 0) break;
        }

        var counted = Math.Exp(Guard.LogCount(spec, releases, ValueSpace.ZeroOne(20)));
        Assert.True(seen.Count <= Math.Round(counted), $"{seen.Count} sequences seen, {counted} counted");
        // And the exact count is far below the paper's compression bound (Claim 3.2 as quoted in DESIGN.md).
        Assert.True(Guard.LogCount(spec, releases, ValueSpace.ZeroOne(20)) <= Guard.LadderPaperLogCount(step, releases));
    }

    [Theory]
    [InlineData(0.01, 10)]
    [InlineData(0.01, 1000)]
    [InlineData(0.05, 100)]
    [InlineData(0.002, 10000)]
    public void The_exact_ladder_count_never_exceeds_the_papers(double step, int k)
    {
        Assert.True(Guard.LogCount(GuardSpec.Ladder(step), k, ValueSpace.ZeroOne(100_000)) <= Guard.LadderPaperLogCount(step, k));
    }

    [Fact]
    public void The_ladder_papers_epsilon_is_the_arithmetic_of_thm_3_1()
    {
        // ε = sqrt(((1/η + 2)·ln(4k/η) + 1 + ln(1/δ))/(2n)); η = 0.01, k = 1000, n = 100,000, δ = 0.05 (arithmetic).
        var expected = Math.Sqrt((102 * Math.Log(400_000) + 1 + Math.Log(20)) / 200_000);
        Assert.Equal(expected, Guard.LadderPaperEpsilon(0.01, 1000, 100_000, 0.05), 12);
    }

    [Fact]
    public void Exact_and_rounded_releases_count_their_values()
    {
        // exact release of an error on n examples: n + 1 values per look; rounded:D: 10^D + 1 (DESIGN.md).
        Assert.Equal(3 * Math.Log(1001), Guard.LogCount(GuardSpec.Exact, 3, Unit), 12);
        Assert.Equal(3 * Math.Log(101), Guard.LogCount(GuardSpec.Rounded(2), 3, Unit), 12);
        Assert.Equal(0.12, Guard.Apply(GuardSpec.Rounded(2), GuardState.Empty, 0.1234, Unit, false).Value);
        // Rounding finer than the data itself counts no more than exact release.
        Assert.Equal(Math.Log(11), Guard.LogCount(GuardSpec.Rounded(6), 1, ValueSpace.ZeroOne(10)), 12);
    }

    [Fact]
    public void Thresholdout_answers_from_training_unless_the_holdout_differs_and_refuses_when_spent()
    {
        // σ = 0 makes the rule deterministic: answer E_train when |E_holdout − E_train| ≤ T, else E_holdout (on a 0.001 grid).
        var spec = GuardSpec.Thresholdout(0.05, 0.0, 2);
        var close = Guard.Apply(spec, GuardState.Empty, 0.20, Unit, false, trainScore: 0.18);
        Assert.Equal(0.18, close.Value);
        Assert.False(close.HoldoutAnswered);
        var far = Guard.Apply(spec, GuardState.Empty, 0.3004, Unit, false, trainScore: 0.10);
        Assert.Equal(0.300, far.Value);
        Assert.True(far.HoldoutAnswered);
        Assert.True(Guard.Apply(spec, new GuardState(5, 2, 0.3), 0.5, Unit, false, trainScore: 0.1).Refused);
        Assert.Throws<AccountantException>(() => Guard.Apply(spec, GuardState.Empty, 0.5, Unit, false));
        // Seeded noise is reproducible: the same seed and state give the same release, another seed (almost surely) another.
        var noisy = GuardSpec.Thresholdout(0.04, 0.01, 10);
        var a = Guard.Apply(noisy, GuardState.Empty, 0.4, Unit, false, 0.1, new SeededGuardNoise(3));
        var b = Guard.Apply(noisy, GuardState.Empty, 0.4, Unit, false, 0.1, new SeededGuardNoise(3));
        Assert.Equal(a, b);
        Assert.NotEqual(a.Value, Guard.Apply(noisy, GuardState.Empty, 0.4, Unit, false, 0.1, new SeededGuardNoise(4)).Value);
        // Counting: Σ_{i ≤ min(B, j)} C(j, i)·V^i with V = 1001 grid values.
        Assert.Equal(Math.Log(1 + 3 * 1001.0 + 3 * 1001.0 * 1001.0), Guard.LogCount(spec, 3, Unit), 9);
    }

    [Fact]
    public void Laplace_draws_have_the_right_scale()
    {
        // Lap(b) has mean 0 and mean absolute deviation b (a fact of the distribution); 200,000 draws, 5 standard errors.
        var random = new Random(11);
        var draws = Enumerable.Range(0, 200_000).Select(_ => Guard.Laplace(random, 0.5)).ToArray();
        Assert.Equal(0.0, draws.Average(), 5 * 0.5 * Math.Sqrt(2.0 / draws.Length));
        Assert.Equal(0.5, draws.Average(Math.Abs), 5 * 0.5 / Math.Sqrt(draws.Length));
    }

    [Fact]
    public void Seeded_noise_is_laplace_distributed_and_independent_across_addresses()
    {
        // Each address (kind, index) of a seeded stream is one Laplace draw. Kolmogorov–Smirnov against MathNet's Laplace
        // CDF (a general-purpose reference): with 20,000 draws the 0.1% critical value of D is c/sqrt(n), c = sqrt(−ln(0.001/2)/2)
        // = 1.9495 (the leading term of the Kolmogorov distribution's tail, 2·exp(−2c²); arithmetic).
        const int n = 20_000;
        var noise = new SeededGuardNoise(0x5EED);
        var laplace = new MathNet.Numerics.Distributions.Laplace(0, 0.5);
        foreach (var draws in new[]
        {
            Enumerable.Range(0, n).Select(i => noise.Comparison(i, 0.5)).ToArray(),
            Enumerable.Range(0, n).Select(i => noise.Answer(i, 0.5)).ToArray(),
            Enumerable.Range(0, n).Select(i => noise.Threshold(i, 0.5)).ToArray(),
        })
        {
            var sorted = draws.OrderBy(d => d).ToArray();
            var d = sorted.Select((x, i) => Math.Max(Math.Abs(laplace.CumulativeDistribution(x) - i / (double)n), Math.Abs(laplace.CumulativeDistribution(x) - (i + 1) / (double)n))).Max();
            Assert.True(d < 1.95 / Math.Sqrt(n), $"KS distance {d}");
        }

        // Draws for different purposes at the same index, and at neighbouring indices, are uncorrelated: |r| < 4/sqrt(n)
        // (the sample correlation of independent draws has standard error 1/sqrt(n)).
        var eta = Enumerable.Range(0, n).Select(i => noise.Comparison(i, 1)).ToArray();
        var answer = Enumerable.Range(0, n).Select(i => noise.Answer(i, 1)).ToArray();
        var next = Enumerable.Range(1, n).Select(i => noise.Comparison(i, 1)).ToArray();
        Assert.True(Math.Abs(MathNet.Numerics.Statistics.Correlation.Pearson(eta, answer)) < 4 / Math.Sqrt(n));
        Assert.True(Math.Abs(MathNet.Numerics.Statistics.Correlation.Pearson(eta, next)) < 4 / Math.Sqrt(n));
        // The same address always gives the same draw; another seed gives other draws.
        Assert.Equal(eta, Enumerable.Range(0, n).Select(i => new SeededGuardNoise(0x5EED).Comparison(i, 1)));
        Assert.NotEqual(eta[0], new SeededGuardNoise(0x5EEE).Comparison(0, 1));
    }

    [Theory]
    [InlineData("exact")]
    [InlineData("rounded:3")]
    [InlineData("ladder:0.005")]
    [InlineData("thresholdout:0.04,0.01,50")]
    public void Specs_round_trip(string text) => Assert.Equal(text, GuardSpec.Parse(text).ToString());

    [Theory]
    [InlineData("ladder")]
    [InlineData("ladder:0")]
    [InlineData("rounded:x")]
    [InlineData("thresholdout:0.1,0.01")]
    [InlineData("gaussian:1")]
    public void Bad_specs_are_refused(string text) =>
        Assert.Equal(ErrorKind.BadArguments, Assert.Throws<AccountantException>(() => GuardSpec.Parse(text)).Kind);
}

public class AdaptiveAccountingTests
{
    [Fact]
    public void Without_adaptive_looks_the_effective_count_is_the_count_of_looks()
    {
        var looks = Enumerable.Repeat(new AccountedLook(false, GuardSpec.Exact), 37).ToList();
        Assert.Equal(Math.Log(37), AdaptiveAccounting.LogEffectiveLooks(looks, ValueSpace.ZeroOne(500)), 12);
        Assert.False(AdaptiveAccounting.HasUnguardedAdaptivity(looks));
    }

    [Fact]
    public void Adaptive_looks_add_one_candidate_per_possible_prefix()
    {
        // 3 fixed looks shown exactly on n = 100, then 2 adaptive looks shown exactly:
        // M_eff = 3 + 101^3 + 101^4 (the second adaptive look also saw the first one's value).
        var looks = new List<AccountedLook> { new(false, GuardSpec.Exact), new(false, GuardSpec.Exact), new(false, GuardSpec.Exact), new(true, GuardSpec.Exact), new(true, GuardSpec.Exact) };
        var expected = Math.Log(3 + Math.Pow(101, 3) + Math.Pow(101, 4));
        Assert.Equal(expected, AdaptiveAccounting.LogEffectiveLooks(looks, ValueSpace.ZeroOne(100)), 9);
        Assert.True(AdaptiveAccounting.HasUnguardedAdaptivity(looks));
        // Never above the crude ln M + Σ ln V over all released values.
        Assert.True(expected <= Math.Log(5) + 5 * Math.Log(101));
    }

    [Fact]
    public void A_guard_shrinks_the_count()
    {
        var exact = Enumerable.Range(0, 50).Select(i => new AccountedLook(i >= 10, GuardSpec.Exact)).ToList();
        var ladder = Enumerable.Range(0, 50).Select(i => new AccountedLook(i >= 10, GuardSpec.Ladder(0.02))).ToList();
        var space = ValueSpace.ZeroOne(2000);
        Assert.True(AdaptiveAccounting.LogEffectiveLooks(ladder, space) < AdaptiveAccounting.LogEffectiveLooks(exact, space) / 4);
        Assert.False(AdaptiveAccounting.HasUnguardedAdaptivity(ladder));
    }
}
