namespace Accountant.Simulation;

/// <summary>
/// A <see cref="Random"/> over <see cref="Randomness.Xoshiro256"/>: a fast generator whose stream is fixed by its seed,
/// so a simulation gives the same result however its repetitions are spread over threads.
/// </summary>
public sealed class FastRandom : Random
{
    private Randomness.Xoshiro256 _core;

    public FastRandom(ulong seed) => _core = new Randomness.Xoshiro256(seed);

    /// <summary>A generator for one repetition of a seeded simulation.</summary>
    public static FastRandom For(int seed, long repetition) => new(unchecked((ulong)seed * 0x9E3779B97F4A7C15UL ^ (ulong)repetition * 0xD1B54A32D192ED03UL));

    public ulong NextUInt64() => _core.NextUInt64();

    public override double NextDouble() => (NextUInt64() >> 11) * (1.0 / (1UL << 53));

    protected override double Sample() => NextDouble();

    public override int Next(int maxValue) => (int)(NextDouble() * maxValue);

    public override int Next(int minValue, int maxValue) => minValue + (int)(NextDouble() * ((long)maxValue - minValue));

    public override int Next() => (int)(NextUInt64() >> 33);
}
