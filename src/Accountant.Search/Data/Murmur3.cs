using System.Buffers.Binary;
using System.Numerics;
using System.Text;

namespace Accountant.Search.Data;

/// <summary>
/// MurmurHash3_x86_32 (Austin Appleby, 2011, SMHasher; public domain) of bytes; for a text value, of its UTF-8. On ASCII
/// text it gives what ML.NET's hashing transform gives.
/// Feature hashing (Weinberger et al. 2009, ICML, "Feature hashing for large scale multitask learning") maps a categorical
/// value to a slot by the low bits of its hash.
/// </summary>
public static class Murmur3
{
    public static uint Hash(ReadOnlySpan<byte> data, uint seed)
    {
        const uint c1 = 0xcc9e2d51, c2 = 0x1b873593;
        var h = seed;
        var blocks = data.Length / 4;
        for (var i = 0; i < blocks; i++)
        {
            var k = BinaryPrimitives.ReadUInt32LittleEndian(data.Slice(4 * i, 4));
            k *= c1;
            k = BitOperations.RotateLeft(k, 15);
            k *= c2;
            h ^= k;
            h = BitOperations.RotateLeft(h, 13);
            h = h * 5 + 0xe6546b64;
        }

        var tail = data[(4 * blocks)..];
        uint t = 0;
        switch (tail.Length)
        {
            case 3:
                t ^= (uint)tail[2] << 16;
                goto case 2;
            case 2:
                t ^= (uint)tail[1] << 8;
                goto case 1;
            case 1:
                t ^= tail[0];
                t *= c1;
                t = BitOperations.RotateLeft(t, 15);
                t *= c2;
                h ^= t;
                break;
        }

        h ^= (uint)data.Length;
        h ^= h >> 16;
        h *= 0x85ebca6b;
        h ^= h >> 13;
        h *= 0xc2b2ae35;
        h ^= h >> 16;
        return h;
    }

    /// <summary>The hash of text's UTF-8 bytes.</summary>
    public static uint Hash(string text, uint seed) => Hash(Encoding.UTF8.GetBytes(text), seed);
}
