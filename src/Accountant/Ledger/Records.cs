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

/// <summary>How a look's score was released to the search that made it: the guard, its stream, and what it told.</summary>
/// <param name="Guard">The guard's canonical spelling, e.g. <c>ladder:0.01</c>.</param>
/// <param name="Value">The value told to the search; null when the guard refused (Thresholdout's budget spent).</param>
/// <param name="HoldoutAnswered">Whether the holdout itself was used for the answer (Thresholdout answers from training data otherwise).</param>
/// <param name="TrainScore">The training-set score Thresholdout compared against, when given.</param>
public sealed record Released(string Guard, double? Value, bool HoldoutAnswered, double? TrainScore)
{
    /// <summary>The guard stream the release belongs to (schema 4). Null for a look recorded before streams were declared,
    /// whose stream is named by its guard's spelling.</summary>
    public string? Stream { get; init; }

    /// <summary>Schema 4: this release's position in its stream (0 for the stream's first release).</summary>
    public int? Index { get; init; }

    /// <summary>Schema 4: how many holdout answers the stream had given after this release (Thresholdout's spent budget).</summary>
    public int? Answers { get; init; }

    /// <summary>The stream's name: <see cref="Stream"/>, or the guard's spelling for a look of an older schema.</summary>
    public string StreamName => Stream ?? Guard;
}

/// <summary>A guard stream as declared in the ledger: which guard releases on it and, for Thresholdout, the seed of its
/// noise (<see cref="Guards.SeededGuardNoise"/>), so that every writer, and a verifier, draws the same noise.</summary>
public sealed record GuardStream(string Name, Guards.GuardSpec Guard, ulong? Seed)
{
    /// <summary>Its entry in the chain; 0 while it is being opened.</summary>
    public long Sequence { get; init; }
}

/// <summary>A guard stream's recorded state: its declaration (null for a stream only used before streams were declared)
/// and what it has released so far.</summary>
public sealed record GuardStreamState(string Name, GuardStream? Declared, Guards.GuardState State, Guards.GuardSpec Guard);

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
    Released? Release = null)
{
    /// <summary>A guard stream to declare in the same transaction, before this look (its first release on that stream).</summary>
    public GuardStream? Opens { get; init; }
}

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

/// <summary>One look's configuration and stored per-example losses (null for a score-only look), as a statement streams them.</summary>
public sealed record LossRow(int Number, string Configuration, LossEncoding Encoding, byte[]? Losses);

/// <summary>An opening of a sealed test set: which look's configuration was scored on it, and how it did.</summary>
public sealed record TestOpening(long Sequence, int LookNumber, int TestSize, string TestFingerprint, double TestScore, DateTimeOffset RecordedAt);

/// <summary>A void: marks a look as a mistake. The look still counts.</summary>
public sealed record LookVoid(long Sequence, int LookNumber, string Reason, DateTimeOffset RecordedAt);

/// <summary>The outcome of recomputing the chain.</summary>
public sealed record ChainReport(bool Valid, long Entries, string? Head, long? FirstBadEntry, string? Problem)
{
    /// <summary>What the verifier recounted from the rows, per holdout (in registration order), when the chain verified.</summary>
    public IReadOnlyList<HoldoutRecount> Recounts { get; init; } = [];
}

/// <summary>
/// A holdout's looks as the verifier recounted them from the stored rows, independently of the statement's queries: the
/// looks and adaptive looks, ln M_eff of the adaptive-transcript method over them, and how many guarded releases it
/// replayed through their guard's rule (on how many streams) and found as recorded.
/// </summary>
public sealed record HoldoutRecount(string Holdout, int Looks, int AdaptiveLooks, double LogEffectiveLooks, int Streams, int ReplayedReleases, int UncheckedReleases);
