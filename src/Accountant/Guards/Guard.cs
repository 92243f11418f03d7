using MathNet.Numerics;

namespace Accountant.Guards;

/// <summary>What a guard has done so far on one stream: releases, holdout answers, last value released.</summary>
public sealed record GuardState(int Releases, int HoldoutAnswers, double? LastReleased)
{
    public static GuardState Empty { get; } = new(0, 0, null);

    /// <summary>The state after one more release.</summary>
    public GuardState After(Release release) =>
        new(Releases + 1, HoldoutAnswers + (release.HoldoutAnswered ? 1 : 0), release.Value ?? LastReleased);
}

/// <summary>One release: the value told to the search (null when refused), and whether the holdout itself was used for it.</summary>
public sealed record Release(double? Value, bool HoldoutAnswered)
{
    public bool Refused => Value is null;
}

/// <summary>
/// The guards' release rules and their release-sequence counts. A search that peeks sees only released values; the
/// accountant counts every sequence of values a guard could have released (not just the one it did), which is
/// what makes the union over release sequences valid (Dwork et al. 2015, arXiv 1506.02629, Thm 9).
/// </summary>
public static class Guard
{
    /// <summary>Thresholdout's holdout answers are rounded to this fraction of the range, so they can be counted.</summary>
    public const double ThresholdoutResolution = 0.001;

    /// <summary>
    /// Releases <paramref name="score"/> under the guard, given what the stream released before (<paramref name="state"/>).
    /// <paramref name="higherIsBetter"/> orients the Ladder; Thresholdout needs the training-set score and takes its noise
    /// from <paramref name="noise"/> (a stream in the ledger uses <see cref="SeededGuardNoise"/>, so the release is a fixed
    /// function of the stream's seed, its state and the scores; null draws from <see cref="Random.Shared"/>).
    /// </summary>
    public static Release Apply(GuardSpec spec, GuardState state, double score, ValueSpace space, bool higherIsBetter,
        double? trainScore = null, IGuardNoise? noise = null)
    {
        switch (spec.Kind)
        {
            case GuardKind.Exact:
                return new Release(score, true);
            case GuardKind.Rounded:
                return new Release(Math.Round(score, spec.Decimals, MidpointRounding.ToEven), true);
            case GuardKind.Ladder:
            {
                // Blum & Hardt 2015, Alg. 1: release a new value only when the score beats the last released one by more
                // than η, rounded to the nearest multiple of η; otherwise repeat the last released value.
                var last = state.LastReleased;
                var better = last is null || (higherIsBetter ? score > last.Value + spec.Step : score < last.Value - spec.Step);
                return new Release(better ? OnGrid(Math.Round(score / spec.Step) * spec.Step, space) : last, true);
            }

            default:
                return Thresholdout(spec, state, score, space, trainScore, noise ?? new SequentialGuardNoise(Random.Shared));
        }
    }

    private static Release Thresholdout(GuardSpec spec, GuardState state, double score, ValueSpace space, double? trainScore, IGuardNoise noise)
    {
        if (trainScore is not { } train || !double.IsFinite(train))
        {
            throw AccountantException.BadArguments("thresholdout needs the configuration's score on its training data; give --train-score X (or trainScore in the import).");
        }

        // arXiv 1506.02629, Fig. 1: γ ~ Lap(2σ) sets T̂ = T + γ; per query, if the budget is spent answer ⊥;
        // else η ~ Lap(4σ); if |E_holdout − E_train| > T̂ + η answer E_holdout + Lap(σ), spend one unit and draw a fresh γ;
        // otherwise answer E_train. γ belongs to the epoch (the holdout answers so far), η and the answer's noise to the query.
        if (state.HoldoutAnswers >= spec.Budget)
        {
            return new Release(null, false);
        }

        var gamma = noise.Threshold(state.HoldoutAnswers, 2 * spec.Sigma);
        var eta = noise.Comparison(state.Releases, 4 * spec.Sigma);
        if (Math.Abs(score - train) > spec.Threshold + gamma + eta)
        {
            var noisy = score + noise.Answer(state.Releases, spec.Sigma);
            var step = ThresholdoutResolution * space.Width;
            return new Release(OnGrid(space.Low + Math.Round((noisy - space.Low) / step) * step, space), true);
        }

        return new Release(train, false);
    }

    private static double OnGrid(double value, ValueSpace space) => Math.Round(Math.Clamp(value, space.Low, space.High), 12);

    /// <summary>A Laplace(0, b) draw by inversion.</summary>
    public static double Laplace(Random random, double scale)
    {
        if (scale <= 0) return 0.0;
        // NextDouble is in [0, 1); 0 itself would invert to an infinite draw, so it is drawn again.
        double u;
        do u = random.NextDouble(); while (u == 0);
        return LaplaceOf(u, scale);
    }

    /// <summary>The Laplace(0, b) quantile of a uniform draw <paramref name="u"/> in (0, 1): −b·sign(v)·ln(1 − 2|v|), v = u − ½.</summary>
    public static double LaplaceOf(double u, double scale)
    {
        if (scale <= 0) return 0.0;
        var v = u - 0.5;
        return -scale * Math.Sign(v) * Math.Log(1 - 2 * Math.Abs(v));
    }

    /// <summary>
    /// ln of the number of distinct sequences of <paramref name="releases"/> values this guard can emit: the prefix count
    /// N_{&lt;t} for the next look when <paramref name="releases"/> values were released before it.
    /// <list type="bullet">
    /// <item>exact: V^j, V = n + 1 for 0/1 losses (see <see cref="ValueSpace"/>).</item>
    /// <item>rounded:D: (range·10^D + 1)^j.</item>
    /// <item>ladder:η: the first release is any of G grid values; afterwards the value changes only downward (for losses) by at
    /// least η, so a sequence is fixed by which of the later j − 1 releases changed it (c of them) and the c + 1 distinct grid
    /// values, in order: Σ_c C(j − 1, c)·C(G, c + 1). This exact count never exceeds the paper's (1/η + 2)·ln(4k/η) nats
    /// (Blum &amp; Hardt 2015, Claim 3.2; see <see cref="LadderPaperLogCount"/>).</item>
    /// <item>thresholdout: which of the j answers came from the holdout (at most B) and their values on the rounded grid:
    /// Σ_{i ≤ min(B, j)} C(j, i)·V^i; training answers and refusals add nothing, being fixed by the training data and the count.</item>
    /// </list>
    /// </summary>
    public static double LogCount(GuardSpec spec, int releases, ValueSpace space)
    {
        if (releases <= 0) return 0.0;
        switch (spec.Kind)
        {
            case GuardKind.Exact:
                return releases * space.LogExactValues;
            case GuardKind.Rounded:
                return releases * Math.Min(space.LogExactValues, Math.Log(space.GridPoints(Math.Pow(10, -spec.Decimals))));
            case GuardKind.Ladder:
            {
                var g = (int)Math.Min(int.MaxValue, space.GridPoints(spec.Step));
                var terms = Enumerable.Range(0, Math.Min(releases - 1, g - 1) + 1)
                    .Select(c => SpecialFunctions.BinomialLn(releases - 1, c) + SpecialFunctions.BinomialLn(g, c + 1));
                return Math.Min(LogSumExp(terms), releases * space.LogExactValues);
            }

            default:
            {
                var logV = Math.Log(space.GridPoints(ThresholdoutResolution * space.Width));
                var terms = Enumerable.Range(0, Math.Min(spec.Budget, releases) + 1)
                    .Select(i => SpecialFunctions.BinomialLn(releases, i) + i * logV);
                return LogSumExp(terms);
            }
        }
    }

    /// <summary>
    /// The Ladder's count as its paper states it (Blum &amp; Hardt 2015, arXiv 1502.04585, Claim 3.2, as quoted in DESIGN.md):
    /// a depth-k release sequence compresses into (1/η + 2)·ln(4k/η) nats.
    /// </summary>
    public static double LadderPaperLogCount(double step, int k) => (1.0 / step + 2.0) * Math.Log(4.0 * k / step);

    /// <summary>
    /// The Ladder's own guarantee (Blum &amp; Hardt 2015, Thm 3.1, as quoted in DESIGN.md): for all t ≤ k at once,
    /// |min_{i ≤ t} R_D(f_i) − R_t| ≤ ε except with probability exp(−2ε²n + (1/η + 2)·ln(4k/η) + 1); solved for ε at δ.
    /// It bounds the released best against the best true loss among the submissions, not one chosen model's loss.
    /// </summary>
    public static double LadderPaperEpsilon(double step, int k, long n, double delta) =>
        Math.Sqrt((LadderPaperLogCount(step, k) + 1.0 - Math.Log(delta)) / (2.0 * n));

    public static double LogSumExp(IEnumerable<double> terms)
    {
        var list = terms.Where(t => !double.IsNegativeInfinity(t)).ToList();
        if (list.Count == 0) return double.NegativeInfinity;
        var max = list.Max();
        return max + Math.Log(list.Sum(t => Math.Exp(t - max)));
    }
}
