using System.Buffers.Binary;
using System.Numerics;

namespace Accountant.Comparisons;

/// <summary>Counting on the ledger's 0/1 loss bitsets (bit i of byte i/8, least significant first; 1 = error).</summary>
public static class Bitsets
{
    /// <summary>The number of set bits.</summary>
    public static long Count(ReadOnlySpan<byte> bits)
    {
        long count = 0;
        var i = 0;
        for (; i + 8 <= bits.Length; i += 8) count += BitOperations.PopCount(BinaryPrimitives.ReadUInt64LittleEndian(bits[i..]));
        for (; i < bits.Length; i++) count += BitOperations.PopCount((uint)bits[i]);
        return count;
    }

    /// <summary>Bits set in <paramref name="a"/> only, and in <paramref name="b"/> only (the discordant examples).</summary>
    public static (long OnlyA, long OnlyB) Discordant(ReadOnlySpan<byte> a, ReadOnlySpan<byte> b)
    {
        if (a.Length != b.Length)
        {
            throw new ArgumentException($"the two loss bitsets differ in length ({a.Length} and {b.Length} bytes); they must come from the same holdout.");
        }

        long onlyA = 0, onlyB = 0;
        var i = 0;
        for (; i + 8 <= a.Length; i += 8)
        {
            var x = BinaryPrimitives.ReadUInt64LittleEndian(a[i..]);
            var y = BinaryPrimitives.ReadUInt64LittleEndian(b[i..]);
            onlyA += BitOperations.PopCount(x & ~y);
            onlyB += BitOperations.PopCount(y & ~x);
        }

        for (; i < a.Length; i++)
        {
            onlyA += BitOperations.PopCount((uint)(a[i] & ~b[i] & 0xFF));
            onlyB += BitOperations.PopCount((uint)(b[i] & ~a[i] & 0xFF));
        }

        return (onlyA, onlyB);
    }
}
