namespace Accountant.Estimates;

/// <summary>
/// The random stream of one bootstrap resample: xoshiro256** (Blackman &amp; Vigna 2021, ACM TOMS 47:36) seeded through
/// SplitMix64 (Steele, Lea &amp; Flood 2014, OOPSLA) from the pair (seed, resample index), so each resample's draws depend
/// only on the seed and its index, never on how resamples are spread over threads.
/// </summary>
public struct ResampleRandom
{
    private Randomness.Xoshiro256 _core;
    private uint _half;
    private bool _hasHalf;

    public ResampleRandom(ulong seed, long resample)
    {
        _core = new Randomness.Xoshiro256(Randomness.Xoshiro256.Mix(seed) ^ Randomness.Xoshiro256.Mix(0xD1B54A32D192ED03UL + (ulong)resample));
    }

    /// <summary>The next 64 random bits.</summary>
    public ulong NextUInt64() => _core.NextUInt64();

    /// <summary>
    /// A uniform integer in [0, bound), without bias: Lemire's multiply-and-reject on 32 random bits (Lemire 2019,
    /// ACM TOMACS 29:3, Alg. 5). Each 64-bit output serves two draws, low half first.
    /// </summary>
    public int NextBelow(int bound)
    {
        var range = (uint)bound;
        var product = (ulong)NextUInt32() * range;
        if ((uint)product < range)
        {
            var threshold = (0u - range) % range;
            while ((uint)product < threshold)
            {
                product = (ulong)NextUInt32() * range;
            }
        }

        return (int)(product >> 32);
    }

    /// <summary>The next 32 random bits: the low half of a 64-bit output, then its high half.</summary>
    public uint NextUInt32()
    {
        if (_hasHalf)
        {
            _hasHalf = false;
            return _half;
        }

        var bits = NextUInt64();
        _half = (uint)(bits >> 32);
        _hasHalf = true;
        return (uint)bits;
    }
}
