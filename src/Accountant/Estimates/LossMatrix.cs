using System.Numerics;

namespace Accountant.Estimates;

/// <summary>
/// The 0/1 losses of K looks on n examples as bitsets, one row per look, each row padded with zero bits to a whole number
/// of 512-bit blocks so that vector code needs no tail handling.
/// </summary>
public sealed class LossMatrix
{
    /// <summary>64-bit words per 512-bit block.</summary>
    public const int BlockWords = 8;

    private LossMatrix(int size, int rows, int stride, ulong[] bits, int[] errors)
    {
        Size = size;
        Rows = rows;
        Stride = stride;
        Bits = bits;
        Errors = errors;
    }

    /// <summary>Examples per look (n).</summary>
    public int Size { get; }

    /// <summary>Looks (K).</summary>
    public int Rows { get; }

    /// <summary>64-bit words per row: ⌈n/64⌉ rounded up to a multiple of <see cref="BlockWords"/>.</summary>
    public int Stride { get; }

    /// <summary>Row k occupies words [k·Stride, (k + 1)·Stride); bit i of a row is example i; padding bits are zero.</summary>
    public ulong[] Bits { get; }

    /// <summary>Each row's number of errors.</summary>
    public int[] Errors { get; }

    public ReadOnlySpan<ulong> Row(int k) => Bits.AsSpan(k * Stride, Stride);

    /// <summary>The observed error rate of row k.</summary>
    public double ErrorRate(int k) => Errors[k] / (double)Size;

    public static int StrideFor(int size) => (((size + 63) / 64) + BlockWords - 1) / BlockWords * BlockWords;

    /// <summary>Packs the ledger's bitsets (bit i of byte i/8, least significant first); bits past n are ignored.</summary>
    public static LossMatrix FromBitsets(int size, IReadOnlyList<byte[]> rows)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(size, 1);
        var stride = StrideFor(size);
        var bits = new ulong[checked(rows.Count * stride)];
        var errors = new int[rows.Count];
        var bytes = (size + 7) / 8;
        for (var k = 0; k < rows.Count; k++)
        {
            var row = rows[k];
            if (row.Length != bytes)
            {
                throw new ArgumentException($"row {k} holds {row.Length} bytes, but {size} examples need {bytes}", nameof(rows));
            }

            var target = bits.AsSpan(k * stride, stride);
            System.Runtime.InteropServices.MemoryMarshal.AsBytes(target)[..bytes].Clear();
            row.AsSpan().CopyTo(System.Runtime.InteropServices.MemoryMarshal.AsBytes(target));
            if (!BitConverter.IsLittleEndian)
            {
                for (var w = 0; w < target.Length; w++) target[w] = System.Buffers.Binary.BinaryPrimitives.ReverseEndianness(target[w]);
            }

            var lastWord = (size - 1) / 64;
            var tailBits = size - 64 * lastWord;
            if (tailBits < 64) target[lastWord] &= (1UL << tailBits) - 1;
            var count = 0;
            foreach (var word in target) count += BitOperations.PopCount(word);
            errors[k] = count;
        }

        return new LossMatrix(size, rows.Count, stride, bits, errors);
    }

    /// <summary>Builds a matrix from a predicate loss(k, i), for tests and simulations.</summary>
    public static LossMatrix FromFunction(int rows, int size, Func<int, int, bool> loss)
    {
        var bytes = (size + 7) / 8;
        var list = new List<byte[]>(rows);
        for (var k = 0; k < rows; k++)
        {
            var row = new byte[bytes];
            for (var i = 0; i < size; i++)
            {
                if (loss(k, i)) row[i >> 3] |= (byte)(1 << (i & 7));
            }

            list.Add(row);
        }

        return FromBitsets(size, list);
    }
}
