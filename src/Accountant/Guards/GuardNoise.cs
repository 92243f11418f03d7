using Accountant.Randomness;

namespace Accountant.Guards;

/// <summary>
/// The Laplace noise Thresholdout draws (Dwork et al. 2015, arXiv 1506.02629, Fig. 1): the threshold noise γ ~ Lap(2σ),
/// redrawn after each holdout answer; per query η ~ Lap(4σ) and, for a holdout answer, Lap(σ) added to it. Each draw is
/// addressed by what it is for: γ by the stream's epoch (how many holdout answers came before), η and the answer noise by
/// the query's index in the stream.
/// </summary>
public interface IGuardNoise
{
    /// <summary>γ for the epoch after <paramref name="holdoutAnswers"/> holdout answers, Laplace with scale <paramref name="scale"/>.</summary>
    double Threshold(int holdoutAnswers, double scale);

    /// <summary>η for query <paramref name="query"/> (0-based), Laplace with scale <paramref name="scale"/>.</summary>
    double Comparison(int query, double scale);

    /// <summary>The noise added to the holdout's answer to query <paramref name="query"/>, Laplace with scale <paramref name="scale"/>.</summary>
    double Answer(int query, double scale);
}

/// <summary>
/// Noise that is a fixed function of a stream's seed and each draw's address (a counter-based generator: SplitMix64's
/// finalizer over the seed, the draw's kind and its index, then one xoshiro256** output). Any process that knows the seed
/// draws the same noise for the same query, so a guard stream shared by many writers, or continued after a restart,
/// releases exactly what one process would have, and a verifier can replay it from the ledger.
/// </summary>
public sealed class SeededGuardNoise(ulong seed) : IGuardNoise
{
    private const ulong ThresholdKind = 1, ComparisonKind = 2, AnswerKind = 3;

    public ulong Seed { get; } = seed;

    public double Threshold(int holdoutAnswers, double scale) => Guard.LaplaceOf(Uniform(ThresholdKind, holdoutAnswers), scale);

    public double Comparison(int query, double scale) => Guard.LaplaceOf(Uniform(ComparisonKind, query), scale);

    public double Answer(int query, double scale) => Guard.LaplaceOf(Uniform(AnswerKind, query), scale);

    /// <summary>A uniform draw in the open interval (0, 1) for one address: 53 random bits, centred in their cell.</summary>
    public double Uniform(ulong kind, long index)
    {
        var generator = new Xoshiro256(Xoshiro256.Mix(Seed ^ Xoshiro256.Mix(kind * 0x9E3779B97F4A7C15UL ^ Xoshiro256.Mix(unchecked((ulong)index)))));
        return ((generator.NextUInt64() >> 11) + 0.5) * (1.0 / (1UL << 53));
    }
}

/// <summary>
/// Noise drawn in order from a <see cref="Random"/>, for simulations that run one stream start to finish in one place:
/// γ is drawn when an epoch is first asked for and kept until the next one.
/// </summary>
public sealed class SequentialGuardNoise(Random random) : IGuardNoise
{
    private int _epoch = -1;
    private double _gamma;

    public double Threshold(int holdoutAnswers, double scale)
    {
        if (holdoutAnswers != _epoch)
        {
            _epoch = holdoutAnswers;
            _gamma = Guard.Laplace(random, scale);
        }

        return _gamma;
    }

    public double Comparison(int query, double scale) => Guard.Laplace(random, scale);

    public double Answer(int query, double scale) => Guard.Laplace(random, scale);
}
