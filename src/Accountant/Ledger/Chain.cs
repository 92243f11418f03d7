using System.Buffers;
using System.Globalization;
using System.Security.Cryptography;
using System.Text.Encodings.Web;
using System.Text.Json;

namespace Accountant.Ledger;

/// <summary>
/// The hash chain: entry i carries hash_i = SHA-256(hash_{i−1} ‖ canonical bytes of entry i), with hash_0 = 32 zero bytes.
/// The canonical bytes are compact JSON with a fixed field order, written here and nowhere else, so that every
/// backend hashes the same entry the same way. Blobs enter through their SHA-256 digests.
/// </summary>
public static class Chain
{
    public const int HashSize = 32;

    public static byte[] Genesis { get; } = new byte[HashSize];

    public static byte[] Link(byte[] previous, byte[] canonical)
    {
        var length = previous.Length + canonical.Length;
        var rented = length <= 1024 ? null : ArrayPool<byte>.Shared.Rent(length);
        var buffer = rented is null ? stackalloc byte[length] : rented.AsSpan(0, length);
        previous.CopyTo(buffer);
        canonical.CopyTo(buffer[previous.Length..]);
        var hash = SHA256.HashData(buffer);
        if (rented is not null) ArrayPool<byte>.Shared.Return(rented);
        return hash;
    }

    public static string Hex(byte[] hash) => Convert.ToHexStringLower(hash);

    public static string? BlobDigest(byte[]? blob) => blob is null ? null : Convert.ToHexStringLower(SHA256.HashData(blob));

    public static byte[] HoldoutEntry(long sequence, string name, int size, Metric metric, double lossLow, double lossHigh,
        string fingerprint, byte[] ids, byte[] labels, string createdAt) => Write(w =>
    {
        w.WriteString("kind", "holdout");
        w.WriteNumber("seq", sequence);
        w.WriteString("name", name);
        w.WriteNumber("size", size);
        w.WriteString("metric", metric.Name());
        w.WriteString("lossLow", Number(lossLow));
        w.WriteString("lossHigh", Number(lossHigh));
        w.WriteString("fingerprint", fingerprint);
        w.WriteString("ids", BlobDigest(ids));
        w.WriteString("labels", BlobDigest(labels));
        w.WriteString("createdAt", createdAt);
    });

    public static byte[] LookEntry(long sequence, string holdoutFingerprint, int number, string configuration, string configurationDigest,
        double score, bool adaptive, LossEncoding encoding, byte[]? losses, string? search, string? stage, double? seconds, string recordedAt, Released? release = null) =>
        LookEntryWriter.TryWrite(sequence, holdoutFingerprint, number, configuration, configurationDigest, score, adaptive, encoding, losses, search, stage, seconds, recordedAt, release)
        ?? WriteLookEntry(sequence, holdoutFingerprint, number, configuration, configurationDigest, score, adaptive, encoding, losses, search, stage, seconds, recordedAt, release);

    /// <summary>The look entry through <see cref="Utf8JsonWriter"/>: the definition of its bytes, and the path for text the
    /// direct writer leaves to it.</summary>
    internal static byte[] WriteLookEntry(long sequence, string holdoutFingerprint, int number, string configuration, string configurationDigest,
        double score, bool adaptive, LossEncoding encoding, byte[]? losses, string? search, string? stage, double? seconds, string recordedAt, Released? release) => Write(w =>
    {
        w.WriteString("kind", "look");
        w.WriteNumber("seq", sequence);
        w.WriteString("holdout", holdoutFingerprint);
        w.WriteNumber("number", number);
        w.WriteString("configuration", configuration);
        w.WriteString("configurationDigest", configurationDigest);
        w.WriteString("score", Number(score));
        w.WriteBoolean("adaptive", adaptive);
        w.WriteNumber("lossEncoding", (int)encoding);
        w.WriteString("losses", BlobDigest(losses));
        w.WriteString("search", search);
        w.WriteString("stage", stage);
        w.WriteString("seconds", seconds is { } t ? Number(t) : null);
        w.WriteString("recordedAt", recordedAt);
        // Schema 2: written only for looks released through a guard, so entries of schema 1 hash as before.
        if (release is not null)
        {
            w.WriteString("guard", release.Guard);
            w.WriteString("released", release.Value is { } v ? Number(v) : null);
            w.WriteBoolean("holdoutAnswered", release.HoldoutAnswered);
            w.WriteString("trainScore", release.TrainScore is { } s ? Number(s) : null);
            // Schema 4: the stream and the look's place in it, written only for looks on a declared stream.
            if (release.Stream is not null)
            {
                w.WriteString("stream", release.Stream);
                w.WriteNumber("streamIndex", release.Index ?? 0);
                w.WriteNumber("streamAnswers", release.Answers ?? 0);
            }
        }
    });

    /// <summary>Schema 4: a guard stream declared on a holdout, with the guard that releases on it and its noise seed.</summary>
    public static byte[] StreamEntry(long sequence, string holdoutFingerprint, string name, string guard, ulong? seed, string createdAt) => Write(w =>
    {
        w.WriteString("kind", "stream");
        w.WriteNumber("seq", sequence);
        w.WriteString("holdout", holdoutFingerprint);
        w.WriteString("name", name);
        w.WriteString("guard", guard);
        w.WriteString("seed", seed is { } s ? s.ToString(CultureInfo.InvariantCulture) : null);
        w.WriteString("createdAt", createdAt);
    });

    public static byte[] OpeningEntry(long sequence, string holdoutFingerprint, int lookNumber, int testSize, string testFingerprint, double testScore, string recordedAt) => Write(w =>
    {
        w.WriteString("kind", "opening");
        w.WriteNumber("seq", sequence);
        w.WriteString("holdout", holdoutFingerprint);
        w.WriteNumber("look", lookNumber);
        w.WriteNumber("testSize", testSize);
        w.WriteString("testFingerprint", testFingerprint);
        w.WriteString("testScore", Number(testScore));
        w.WriteString("recordedAt", recordedAt);
    });

    public static byte[] VoidEntry(long sequence, string holdoutFingerprint, int lookNumber, string reason, string recordedAt) => Write(w =>
    {
        w.WriteString("kind", "void");
        w.WriteNumber("seq", sequence);
        w.WriteString("holdout", holdoutFingerprint);
        w.WriteNumber("look", lookNumber);
        w.WriteString("reason", reason);
        w.WriteString("recordedAt", recordedAt);
    });

    /// <summary>Shortest round-trip text of a double (deterministic since .NET Core 3.0).</summary>
    public static string Number(double value) => value.ToString("R", CultureInfo.InvariantCulture);

    public static string Timestamp(DateTimeOffset time) => time.ToUniversalTime().ToString("yyyy-MM-dd'T'HH:mm:ss.fffffff'Z'", CultureInfo.InvariantCulture);

    /// <summary>Reads a <see cref="Timestamp"/>. The exact shape it writes is read directly; anything else goes to
    /// <see cref="DateTimeOffset.ParseExact(string, string, IFormatProvider, DateTimeStyles)"/>, which accepts or refuses it as
    /// before (its first call costs some 14 ms of setup, a seventh of a one-look 'accountant record').</summary>
    public static DateTimeOffset ParseTimestamp(string text) => TryReadTimestamp(text) ??
        DateTimeOffset.ParseExact(text, "yyyy-MM-dd'T'HH:mm:ss.fffffff'Z'", CultureInfo.InvariantCulture, DateTimeStyles.AssumeUniversal);

    private static DateTimeOffset? TryReadTimestamp(string text)
    {
        if (text.Length != 28 || text[4] != '-' || text[7] != '-' || text[10] != 'T' || text[13] != ':' || text[16] != ':' || text[19] != '.' || text[27] != 'Z') return null;
        int Digits(int start, int count)
        {
            var value = 0;
            for (var i = start; i < start + count; i++)
            {
                var d = text[i] - '0';
                if ((uint)d > 9) return -1;
                value = 10 * value + d;
            }

            return value;
        }

        int year = Digits(0, 4), month = Digits(5, 2), day = Digits(8, 2), hour = Digits(11, 2), minute = Digits(14, 2), second = Digits(17, 2), ticks = Digits(20, 7);
        if (year < 1 || month is < 1 or > 12 || day < 1 || day > DateTime.DaysInMonth(year, month) || hour is < 0 or > 23 || minute is < 0 or > 59
            || second is < 0 or > 59 || ticks < 0) return null;
        return new DateTimeOffset(new DateTime(year, month, day, hour, minute, second, DateTimeKind.Utc).AddTicks(ticks), TimeSpan.Zero);
    }

    [ThreadStatic] private static ArrayBufferWriter<byte>? t_buffer;
    [ThreadStatic] private static Utf8JsonWriter? t_writer;

    /// <summary>Relaxed escaping: non-ASCII text is written as it is, not as \u escapes. Apart, so that a look entry
    /// written directly does not load the encoder.</summary>
    private static class Json
    {
        public static readonly JsonWriterOptions Options = new() { Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping };
    }

    private static byte[] Write(Action<Utf8JsonWriter> body)
    {
        // One buffer and writer per thread, reused.
        var buffer = t_buffer ??= new ArrayBufferWriter<byte>(512);
        buffer.ResetWrittenCount();
        var writer = t_writer ??= new Utf8JsonWriter(buffer, Json.Options);
        writer.Reset(buffer);
        writer.WriteStartObject();
        writer.WriteNumber("v", 1);
        body(writer);
        writer.WriteEndObject();
        writer.Flush();
        return buffer.WrittenSpan.ToArray();
    }
}
