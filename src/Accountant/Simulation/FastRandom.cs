namespace Accountant.Simulation;

/// <summary>
/// xoshiro256** (Blackman &amp; Vigna 2018) seeded through SplitMix64: a fast generator whose stream is fixed by its seed,
/// so a simulation gives the same result however its repetitions are spread over threads.
/// </summary>
public sealed class FastRandom : Random
{
    private ulong _s0, _s1, _s2, _s3;

    public FastRandom(ulong seed)
    {
        _s0 = SplitMix(ref seed);
        _s1 = SplitMix(ref seed);
        _s2 = SplitMix(ref seed);
        _s3 = SplitMix(ref seed);
    }

    /// <summary>A generator for one repetition of a seeded simulation.</summary>
    public static FastRandom For(int seed, long repetition) => new(unchecked((ulong)seed * 0x9E3779B97F4A7C15UL ^ (ulong)repetition * 0xD1B54A32D192ED03UL));

    private static ulong SplitMix(ref ulong x)
    {
        var z = x += 0x9E3779B97F4A7C15UL;
        z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9UL;
        z = (z ^ (z >> 27)) * 0x94D049BB133111EBUL;
        return z ^ (z >> 31);
    }

    public ulong NextUInt64()
    {
        var result = ulong.RotateLeft(_s1 * 5, 7) * 9;
        var t = _s1 << 17;
        _s2 ^= _s0;
        _s3 ^= _s1;
        _s1 ^= _s2;
        _s0 ^= _s3;
        _s2 ^= t;
        _s3 = ulong.RotateLeft(_s3, 45);
        return result;
    }

    public override double NextDouble() => (NextUInt64() >> 11) * (1.0 / (1UL << 53));

    protected override double Sample() => NextDouble();

    public override int Next(int maxValue) => (int)(NextDouble() * maxValue);

    public override int Next(int minValue, int maxValue) => minValue + (int)(NextDouble() * ((long)maxValue - minValue));

    public override int Next() => (int)(NextUInt64() >> 33);
}
