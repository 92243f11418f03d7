using Accountant.Bounds;

namespace Accountant.Ledger;

/// <summary>One example of a holdout: its id and its label, both as text (labels canonicalized, see <see cref="Fingerprint"/>).</summary>
public readonly record struct HoldoutExample(string Id, string Label);

/// <summary>A registered holdout, as read back from the ledger (without its examples).</summary>
public sealed record Holdout(
    long Key,
    string Name,
    int Size,
    Metric Metric,
    LossRange LossRange,
    string Fingerprint,
    DateTimeOffset CreatedAt);

/// <summary>How a look's per-example losses are stored.</summary>
public enum LossEncoding
{
    /// <summary>No per-example losses: only the score is known.</summary>
    None = 0,
    /// <summary>0/1 losses as a bitset, bit i of byte i/8 (least significant first) for example i in id order.</summary>
    Bitset = 1,
    /// <summary>Bounded losses as little-endian float32, one per example in id order.</summary>
    Float32 = 2,
    /// <summary>Prediction scores (for AUC) as little-endian float32, one per example in id order.</summary>
    Scores = 3,
}

/// <summary>How a look's score was released to the search that made it: the guard's spelling and what it told.</summary>
/// <param name="Guard">The guard's canonical spelling (its stream), e.g. <c>ladder:0.01</c>.</param>
/// <param name="Value">The value told to the search; null when the guard refused (Thresholdout's budget spent).</param>
/// <param name="HoldoutAnswered">Whether the holdout itself was used for the answer (Thresholdout answers from training data otherwise).</param>
/// <param name="TrainScore">The training-set score Thresholdout compared against, when given.</param>
public sealed record Released(string Guard, double? Value, bool HoldoutAnswered, double? TrainScore);

/// <summary>A look to append: what was scored and how it did.</summary>
public sealed record NewLook(
    string Configuration,
    double Score,
    LossEncoding LossEncoding = LossEncoding.None,
    byte[]? Losses = null,
    string? Search = null,
    string? Stage = null,
    bool Adaptive = false,
    double? Seconds = null,
    Released? Release = null);

/// <summary>A look as stored. <see cref="Number"/> counts 1, 2, 3, … per holdout in the order recorded.</summary>
public sealed record Look(
    long Sequence,
    int Number,
    string Configuration,
    string ConfigurationDigest,
    double Score,
    LossEncoding LossEncoding,
    string? Search,
    string? Stage,
    bool Adaptive,
    DateTimeOffset RecordedAt,
    double? Seconds = null,
    Released? Release = null)
{
    public bool HasLosses => LossEncoding != LossEncoding.None;
}

/// <summary>An opening of a sealed test set: which look's configuration was scored on it, and how it did.</summary>
public sealed record TestOpening(long Sequence, int LookNumber, int TestSize, string TestFingerprint, double TestScore, DateTimeOffset RecordedAt);

/// <summary>A void: marks a look as a mistake. The look still counts.</summary>
public sealed record LookVoid(long Sequence, int LookNumber, string Reason, DateTimeOffset RecordedAt);

/// <summary>The outcome of recomputing the chain.</summary>
public sealed record ChainReport(bool Valid, long Entries, string? Head, long? FirstBadEntry, string? Problem);
