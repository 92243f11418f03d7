using System.Numerics;

namespace Accountant.Comparisons;

/// <summary>
/// How many of a set of 0/1 loss vectors have a 1 at each example, bit-sliced: plane p holds bit p of every example's
/// count, so adding a vector is a ripple of ANDs and XORs over 64 examples at a time. The majority anchors and the
/// simulated attack's majority vote both count with it.
/// </summary>
public sealed class BitCounter(int words)
{
    private readonly List<ulong[]> _planes = [];
    private readonly ulong[] _carry = new ulong[words];

    public int Members { get; private set; }

    public void Add(ReadOnlySpan<ulong> bits)
    {
        Members++;
        var carry = _carry;
        bits.CopyTo(carry);
        for (var p = 0; ; p++)
        {
            if (p == _planes.Count) _planes.Add(new ulong[words]);
            var plane = _planes[p];
            var any = 0UL;
            for (var w = 0; w < words; w++)
            {
                var c = plane[w] & carry[w];
                plane[w] ^= carry[w];
                carry[w] = c;
                any |= c;
            }

            if (any == 0) return;
        }
    }

    /// <summary>The examples whose count exceeds half the members: count &gt; ⌊members/2⌋.</summary>
    public ulong[] Majority(int n)
    {
        var threshold = (ulong)(Members / 2);
        var result = new ulong[words];
        for (var w = 0; w < words; w++)
        {
            // Compare each example's count with the constant, from the most significant plane down.
            ulong greater = 0, equal = ulong.MaxValue;
            for (var p = Math.Max(_planes.Count, 64 - BitOperations.LeadingZeroCount(threshold)) - 1; p >= 0; p--)
            {
                var bit = p < _planes.Count ? _planes[p][w] : 0UL;
                var t = p < 64 && ((threshold >> p) & 1) == 1 ? ulong.MaxValue : 0UL;
                greater |= equal & bit & ~t;
                equal &= ~(bit ^ t);
            }

            result[w] = greater;
        }

        var tail = n % 64;
        if (tail != 0) result[^1] &= (1UL << tail) - 1;
        return result;
    }
}
