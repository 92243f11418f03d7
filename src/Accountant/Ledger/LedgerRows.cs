namespace Accountant.Ledger;

/// <summary>One row of the chain as stored: its number, kind, the previous entry's hash and its own.</summary>
public sealed record EntryRow(long Sequence, string Kind, byte[] Previous, byte[] Hash);

/// <summary>A holdout row as stored (ids and labels packed, see <see cref="Fingerprint.PackStrings"/>).</summary>
public sealed record HoldoutRow(long Id, long Sequence, string Name, int Size, string Metric, double LossLow, double LossHigh,
    string Fingerprint, byte[] Ids, byte[] Labels, string CreatedAt);

/// <summary>A look row as stored, losses included.</summary>
public sealed record LookRow(long Sequence, long HoldoutId, int Number, string Configuration, string ConfigurationDigest, double Score,
    int Adaptive, int LossEncoding, byte[]? Losses, string? Search, string? Stage, double? Seconds, string RecordedAt, Released? Release);

public sealed record VoidRow(long Sequence, long HoldoutId, int LookNumber, string Reason, string RecordedAt);

/// <summary>A guard stream row as stored (schema 4); the seed is the stored 64-bit integer, read as unsigned.</summary>
public sealed record StreamRow(long Sequence, long HoldoutId, string Name, string Guard, long? Seed, string CreatedAt);

public sealed record OpeningRow(long Sequence, long HoldoutId, int LookNumber, int TestSize, string TestFingerprint, double TestScore, string RecordedAt);

/// <summary>
/// A run of consecutive stored entries and the typed rows carrying the same entry numbers. A row that could not be read
/// (a field of the wrong type or form) is listed in <see cref="Damaged"/> by its entry number instead.
/// </summary>
public sealed class LedgerChunk
{
    public List<EntryRow> Entries { get; } = [];
    public Dictionary<long, HoldoutRow> Holdouts { get; } = [];
    public Dictionary<long, LookRow> Looks { get; } = [];
    public Dictionary<long, VoidRow> Voids { get; } = [];
    public Dictionary<long, OpeningRow> Openings { get; } = [];
    public Dictionary<long, StreamRow> Streams { get; } = [];
    public HashSet<long> Damaged { get; } = [];

    /// <summary>The entry numbers of the typed rows in this chunk, for finding rows that are in a table but not in the chain.</summary>
    public IEnumerable<(long Sequence, string Kind)> TypedRows() =>
        Holdouts.Keys.Select(s => (s, "holdout")).Concat(Looks.Keys.Select(s => (s, "look")))
            .Concat(Voids.Keys.Select(s => (s, "void"))).Concat(Openings.Keys.Select(s => (s, "opening"))).Concat(Streams.Keys.Select(s => (s, "stream")));
}

/// <summary>
/// The rows of a ledger read back as stored, in entry order, by any backend: what <see cref="ChainVerifier"/> checks and
/// what a copy moves. A backend reads them from one consistent snapshot.
/// </summary>
public interface ILedgerRows
{
    /// <summary>Starts reading from one consistent snapshot, held until the result is disposed.</summary>
    IDisposable Snapshot();

    /// <summary>The entries in number order, in chunks of about <paramref name="size"/> entries with their typed rows.</summary>
    IEnumerable<LedgerChunk> Chunks(int size = 2000);

    /// <summary>The first typed row (by entry number) that has no chain entry of its kind, if any.</summary>
    (long Sequence, string Kind)? Orphan();
}
