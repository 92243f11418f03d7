using System.Globalization;
using System.Security.Cryptography;

namespace Accountant.Ledger;

/// <summary>
/// Writes a look's canonical entry bytes directly into a reused buffer, without a JSON writer: the same compact JSON,
/// fields in the same order, as <see cref="Chain.WriteLookEntry"/>. Text is copied when it is printable ASCII, with
/// the quote and backslash written as <c>\"</c> and <c>\\</c>, exactly as the relaxed escaping writer writes them; any
/// other character (controls, DEL, non-ASCII) makes it give up and leave the entry to that writer, so the bytes of
/// every entry are the writer's.
/// </summary>
internal static class LookEntryWriter
{
    [ThreadStatic] private static byte[]? t_buffer;

    /// <summary>The entry's bytes, or null when some text needs the JSON writer's escaping.</summary>
    public static byte[]? TryWrite(long sequence, string holdoutFingerprint, int number, string configuration, string configurationDigest,
        double score, bool adaptive, LossEncoding encoding, byte[]? losses, string? search, string? stage, double? seconds, string recordedAt, Released? release)
    {
        var most = 512 + 2 * (holdoutFingerprint.Length + configuration.Length + configurationDigest.Length + recordedAt.Length
            + (search?.Length ?? 0) + (stage?.Length ?? 0) + (release?.Guard.Length ?? 0) + (release?.Stream?.Length ?? 0));
        var buffer = t_buffer is { } reused && reused.Length >= most ? reused : t_buffer = new byte[Math.Max(most, 1024)];
        var w = new Cursor(buffer);
        w.Raw("{\"v\":1,\"kind\":\"look\",\"seq\":"u8);
        w.Integer(sequence);
        if (!w.Text(",\"holdout\":"u8, holdoutFingerprint)) return null;
        w.Raw(",\"number\":"u8);
        w.Integer(number);
        if (!w.Text(",\"configuration\":"u8, configuration)) return null;
        if (!w.Text(",\"configurationDigest\":"u8, configurationDigest)) return null;
        w.Number(",\"score\":"u8, score);
        w.Raw(adaptive ? ",\"adaptive\":true"u8 : ",\"adaptive\":false"u8);
        w.Raw(",\"lossEncoding\":"u8);
        w.Integer((int)encoding);
        w.Digest(",\"losses\":"u8, losses);
        if (!w.Text(",\"search\":"u8, search)) return null;
        if (!w.Text(",\"stage\":"u8, stage)) return null;
        w.Number(",\"seconds\":"u8, seconds);
        if (!w.Text(",\"recordedAt\":"u8, recordedAt)) return null;
        if (release is not null)
        {
            if (!w.Text(",\"guard\":"u8, release.Guard)) return null;
            w.Number(",\"released\":"u8, release.Value);
            w.Raw(release.HoldoutAnswered ? ",\"holdoutAnswered\":true"u8 : ",\"holdoutAnswered\":false"u8);
            w.Number(",\"trainScore\":"u8, release.TrainScore);
            if (release.Stream is not null)
            {
                if (!w.Text(",\"stream\":"u8, release.Stream)) return null;
                w.Raw(",\"streamIndex\":"u8);
                w.Integer(release.Index ?? 0);
                w.Raw(",\"streamAnswers\":"u8);
                w.Integer(release.Answers ?? 0);
            }
        }

        w.Raw("}"u8);
        return buffer.AsSpan(0, w.Written).ToArray();
    }

    /// <summary>A write position in a buffer sized beforehand for the longest entry these inputs can make.</summary>
    private ref struct Cursor(byte[] buffer)
    {
        private readonly Span<byte> _buffer = buffer;

        public int Written { get; private set; }

        public void Raw(ReadOnlySpan<byte> bytes)
        {
            bytes.CopyTo(_buffer[Written..]);
            Written += bytes.Length;
        }

        public void Integer(long value)
        {
            value.TryFormat(_buffer[Written..], out var n, default, CultureInfo.InvariantCulture);
            Written += n;
        }

        /// <summary>A double as a string of its shortest round-trip text (<see cref="Chain.Number"/>), or null.</summary>
        public void Number(ReadOnlySpan<byte> name, double? value)
        {
            Raw(name);
            if (value is not { } v)
            {
                Raw("null"u8);
                return;
            }

            Raw("\""u8);
            v.TryFormat(_buffer[Written..], out var n, "R", CultureInfo.InvariantCulture);
            Written += n;
            Raw("\""u8);
        }

        /// <summary>SHA-256 of a blob in lowercase hex (<see cref="Chain.BlobDigest"/>), or null.</summary>
        public void Digest(ReadOnlySpan<byte> name, byte[]? blob)
        {
            Raw(name);
            if (blob is null)
            {
                Raw("null"u8);
                return;
            }

            Span<byte> hash = stackalloc byte[Chain.HashSize];
            SHA256.HashData(blob, hash);
            Raw("\""u8);
            Convert.TryToHexStringLower(hash, _buffer[Written..], out var n);
            Written += n;
            Raw("\""u8);
        }

        /// <summary>A string, or null; false when it holds a character this writer leaves to the JSON writer.</summary>
        public bool Text(ReadOnlySpan<byte> name, string? value)
        {
            Raw(name);
            if (value is null)
            {
                Raw("null"u8);
                return true;
            }

            _buffer[Written++] = (byte)'"';
            foreach (var c in value)
            {
                if (c is '"' or '\\')
                {
                    _buffer[Written++] = (byte)'\\';
                    _buffer[Written++] = (byte)c;
                }
                else if (c is >= ' ' and <= '~')
                {
                    _buffer[Written++] = (byte)c;
                }
                else
                {
                    return false;
                }
            }

            _buffer[Written++] = (byte)'"';
            return true;
        }
    }
}
