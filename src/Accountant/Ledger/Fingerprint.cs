using System.Globalization;
using System.Security.Cryptography;
using System.Text;

namespace Accountant.Ledger;

/// <summary>
/// The identity of a holdout: SHA-256 over its examples sorted by id (ordinal), each written as a
/// length-prefixed UTF-8 id followed by a length-prefixed UTF-8 label. Two holdouts with the same ids and labels
/// have the same fingerprint whatever order their rows came in.
/// </summary>
public static class Fingerprint
{
    private static readonly byte[] Domain = "accountant/holdout/v1\n"u8.ToArray();

    /// <summary>
    /// A label as the ledger keeps it: trimmed, and when it reads as a finite number (invariant culture),
    /// written in shortest round-trip form, so "1", "1.0" and "1e0" are the same label.
    /// </summary>
    public static string CanonicalLabel(string raw)
    {
        var text = raw.Trim();
        if (double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out var value) && double.IsFinite(value))
        {
            return value == 0.0 ? "0" : value.ToString("R", CultureInfo.InvariantCulture);
        }

        return text;
    }

    public static string Compute(IReadOnlyList<HoldoutExample> sortedExamples)
    {
        using var hash = IncrementalHash.CreateHash(HashAlgorithmName.SHA256);
        hash.AppendData(Domain);
        Span<byte> length = stackalloc byte[4];
        foreach (var example in sortedExamples)
        {
            Append(hash, example.Id, length);
            Append(hash, example.Label, length);
        }

        return Convert.ToHexStringLower(hash.GetHashAndReset());
    }

    private static void Append(IncrementalHash hash, string text, Span<byte> length)
    {
        var bytes = Encoding.UTF8.GetBytes(text);
        System.Buffers.Binary.BinaryPrimitives.WriteInt32LittleEndian(length, bytes.Length);
        hash.AppendData(length);
        hash.AppendData(bytes);
    }

    /// <summary>Packs strings as a blob of length-prefixed UTF-8 (int32 little-endian lengths).</summary>
    internal static byte[] PackStrings(IEnumerable<string> values)
    {
        using var stream = new MemoryStream();
        Span<byte> length = stackalloc byte[4];
        foreach (var value in values)
        {
            var bytes = Encoding.UTF8.GetBytes(value);
            System.Buffers.Binary.BinaryPrimitives.WriteInt32LittleEndian(length, bytes.Length);
            stream.Write(length);
            stream.Write(bytes);
        }

        return stream.ToArray();
    }

    internal static List<string> UnpackStrings(byte[] blob)
    {
        var values = new List<string>();
        var offset = 0;
        while (offset < blob.Length)
        {
            if (offset + 4 > blob.Length) throw new FormatException("truncated string blob");
            var length = System.Buffers.Binary.BinaryPrimitives.ReadInt32LittleEndian(blob.AsSpan(offset, 4));
            offset += 4;
            if (length < 0 || offset + length > blob.Length) throw new FormatException("truncated string blob");
            values.Add(Encoding.UTF8.GetString(blob, offset, length));
            offset += length;
        }

        return values;
    }
}
