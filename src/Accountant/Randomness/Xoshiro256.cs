using System.Numerics;

namespace Accountant.Randomness;

/// <summary>
/// xoshiro256** (Blackman &amp; Vigna 2021, ACM TOMS 47:36), its state filled by SplitMix64 (Steele, Lea &amp; Flood 2014,
/// OOPSLA) from one 64-bit seed. A struct, so hot loops keep it in registers; every seeded stream in the project
/// (simulation repetitions, bootstrap resamples) is one of these.
/// </summary>
public struct Xoshiro256
{
    private ulong _s0, _s1, _s2, _s3;

    public Xoshiro256(ulong seed)
    {
        _s0 = Step(ref seed);
        _s1 = Step(ref seed);
        _s2 = Step(ref seed);
        _s3 = Step(ref seed);
    }

    /// <summary>The SplitMix64 output function (the finalizer applied to a counter).</summary>
    public static ulong Mix(ulong z)
    {
        z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9UL;
        z = (z ^ (z >> 27)) * 0x94D049BB133111EBUL;
        return z ^ (z >> 31);
    }

    private static ulong Step(ref ulong x)
    {
        x += 0x9E3779B97F4A7C15UL;
        return Mix(x);
    }

    /// <summary>The next 64 random bits.</summary>
    public ulong NextUInt64()
    {
        var result = BitOperations.RotateLeft(_s1 * 5, 7) * 9;
        var t = _s1 << 17;
        _s2 ^= _s0;
        _s3 ^= _s1;
        _s1 ^= _s2;
        _s0 ^= _s3;
        _s2 ^= t;
        _s3 = BitOperations.RotateLeft(_s3, 45);
        return result;
    }
}
