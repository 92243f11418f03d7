using System.Buffers;
using System.Globalization;
using System.Security.Cryptography;
using System.Text.Encodings.Web;
using System.Text.Json;

namespace Accountant.Tests.Ledger.Reference;

using Accountant.Ledger;

/// <summary>
/// The look entry as it was written before the direct writer (Utf8JsonWriter through a lambda), kept unchanged as the
/// reference the production bytes must match; every ledger made so far hashes these bytes.
/// </summary>
public static class ReferenceChain
{
    private static readonly JsonWriterOptions Options = new() { Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping };

    public static byte[] LookEntry(long sequence, string holdoutFingerprint, int number, string configuration, string configurationDigest,
        double score, bool adaptive, LossEncoding encoding, byte[]? losses, string? search, string? stage, double? seconds, string recordedAt, Released? release = null) => Write(w =>
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
        w.WriteString("losses", losses is null ? null : Convert.ToHexStringLower(SHA256.HashData(losses)));
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
        }
    });

    /// <summary>Shortest round-trip text of a double (deterministic since .NET Core 3.0).</summary>
    public static string Number(double value) => value.ToString("R", CultureInfo.InvariantCulture);

    [ThreadStatic] private static ArrayBufferWriter<byte>? t_buffer;
    [ThreadStatic] private static Utf8JsonWriter? t_writer;

    private static byte[] Write(Action<Utf8JsonWriter> body)
    {
        // One buffer and writer per thread, reused: an ingest writes one entry per look.
        var buffer = t_buffer ??= new ArrayBufferWriter<byte>(512);
        buffer.ResetWrittenCount();
        var writer = t_writer ??= new Utf8JsonWriter(buffer, Options);
        writer.Reset(buffer);
        writer.WriteStartObject();
        writer.WriteNumber("v", 1);
        body(writer);
        writer.WriteEndObject();
        writer.Flush();
        return buffer.WrittenSpan.ToArray();
    }
}
