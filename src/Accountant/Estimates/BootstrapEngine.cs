using System.Numerics;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.X86;

namespace Accountant.Estimates;

/// <summary>What the bootstrap drew and computed: every look's in-bag loss sum under every resample, and the out-of-bag
/// score of the look that each resample selects.</summary>
/// <param name="Resamples">B.</param>
/// <param name="Rows">K, the looks in the loss matrix.</param>
/// <param name="Sums">Sums[b·K + k] = Σ_i w_bi · loss_ki, where w_b counts how often resample b drew example i (Σ_i w_bi = n).</param>
/// <param name="Selected">Per resample, the selectable row with the smallest in-bag sum (the earliest on ties), or −1.</param>
/// <param name="OutOfBagErrors">Per resample, the selected row's errors on the examples the resample did not draw.</param>
/// <param name="OutOfBagSize">Per resample, how many examples it did not draw.</param>
public sealed record BootstrapDraws(int Resamples, int Rows, int[] Sums, int[] Selected, int[] OutOfBagErrors, int[] OutOfBagSize)
{
    /// <summary>The popcount kernels that computed the sums (more than one when some group of resamples drew a count
    /// too large for the vector kernel).</summary>
    public BootstrapKernel Kernels { get; init; }
}

/// <summary>The engine's popcount kernels, as flags so that <see cref="BootstrapDraws.Kernels"/> can name several.</summary>
[Flags]
public enum BootstrapKernel
{
    /// <summary>Scalar POPCNT, 64 examples per instruction; runs everywhere.</summary>
    Scalar = 1,

    /// <summary>The nibble lookup on 256-bit vectors (VPSHUFB, VPSADBW).</summary>
    Avx2 = 2,

    /// <summary>The nibble lookup on 512-bit vectors.</summary>
    Avx512BW = 4,
}

/// <summary>
/// The bootstrap on 0/1 loss bitsets. A resample is a multiset of n row indices drawn uniformly with replacement
/// (its weights are Multinomial(n; 1/n, …, 1/n)); a look's in-bag loss is Σ_i w_i·loss_i. The weights are split into
/// bit planes (w = Σ_p 2^p·bit_p), so that the weighted sum over a 0/1 loss row is Σ_p 2^p·popcount(loss AND plane_p):
/// 512 (AVX-512BW) or 256 (AVX2) examples per vector instruction instead of one multiply-add each.
/// </summary>
/// <remarks>
/// Resamples are processed in groups of four, spread over cores with <see cref="Parallel.For(int, int, Action{int})"/>;
/// each group draws its weights, builds its planes (a few kilobytes, kept in cache) and sweeps every loss row once.
/// Each resample's random stream depends only on the seed and its index (<see cref="ResampleRandom"/>), so the result is
/// the same on any number of threads. With AVX-512BW, or else AVX2, the popcount uses the nibble lookup of Muła, Kurz &amp;
/// Lemire (2018, Computer Journal 61:111, "Faster Population Counts Using AVX2 Instructions"): VPSHUFB on each nibble,
/// with one lookup table per plane pre-multiplied by 2^p, and VPSADBW to add the bytes, on 512-bit or 256-bit vectors;
/// elsewhere it is the scalar POPCNT. All kernels count the same integers, so the result does not depend on which ran.
/// </remarks>
public static class BootstrapEngine
{
    /// <summary>Resamples handled together: their planes share one pass over the loss rows.</summary>
    public const int GroupSize = 4;

    /// <summary>Planes the vector kernels handle: 8 bits × (2^5 − 1) = 248 still fits a byte.</summary>
    private const int MaxVectorPlanes = 5;

    private static readonly Vector128<byte>[] Luts = BuildLuts();

    /// <summary>The fastest kernel this machine supports, the one <see cref="Run"/> uses.</summary>
    public static BootstrapKernel Kernel { get; } =
        Avx512BW.IsSupported ? BootstrapKernel.Avx512BW : Avx2.IsSupported ? BootstrapKernel.Avx2 : BootstrapKernel.Scalar;

    /// <summary>Whether this machine can run <paramref name="kernel"/>.</summary>
    public static bool IsSupported(BootstrapKernel kernel) => kernel switch
    {
        BootstrapKernel.Scalar => true,
        BootstrapKernel.Avx2 => Avx2.IsSupported,
        BootstrapKernel.Avx512BW => Avx512BW.IsSupported,
        _ => false,
    };

    /// <summary>Draws <paramref name="resamples"/> bootstrap resamples of the examples and computes every row's in-bag sum.</summary>
    /// <param name="matrix">The looks' losses.</param>
    /// <param name="resamples">B, at least 1.</param>
    /// <param name="seed">The seed; the same seed gives the same draws.</param>
    /// <param name="selectable">Which rows a resample may select (for the out-of-bag score); null means all.</param>
    /// <param name="vector">Allow the vector kernels; false runs the scalar one.</param>
    /// <param name="maxThreads">At most this many threads; null for all cores.</param>
    public static BootstrapDraws Run(LossMatrix matrix, int resamples, ulong seed, bool[]? selectable = null, bool vector = true, int? maxThreads = null) =>
        Run(matrix, resamples, seed, selectable, vector ? Kernel : BootstrapKernel.Scalar, maxThreads);

    /// <summary>As the public overload, with the kernel chosen by the caller (tests run each one).</summary>
    /// <param name="kernel">One kernel this machine supports. A group of resamples whose largest count needs more planes
    /// than a vector kernel takes falls back to the scalar one.</param>
    internal static BootstrapDraws Run(LossMatrix matrix, int resamples, ulong seed, bool[]? selectable, BootstrapKernel kernel, int? maxThreads)
    {
        ArgumentNullException.ThrowIfNull(matrix);
        if (!IsSupported(kernel) || !BitOperations.IsPow2((uint)kernel))
        {
            throw new ArgumentException($"kernel {kernel} is not one kernel this machine supports", nameof(kernel));
        }

        ArgumentOutOfRangeException.ThrowIfLessThan(resamples, 1);
        if (selectable is not null && selectable.Length != matrix.Rows)
        {
            throw new ArgumentException("selectable needs one entry per row", nameof(selectable));
        }

        var k = matrix.Rows;
        var sums = new int[checked(resamples * k)];
        var selected = new int[resamples];
        var oobErrors = new int[resamples];
        var oobSize = new int[resamples];
        var groups = (resamples + GroupSize - 1) / GroupSize;
        var options = new ParallelOptions { MaxDegreeOfParallelism = maxThreads ?? Environment.ProcessorCount };
        var ran = 0;
        Parallel.For(0, groups, options, () => new Scratch(matrix.Size, matrix.Stride), (g, _, scratch) =>
        {
            var first = g * GroupSize;
            var count = Math.Min(GroupSize, resamples - first);
            var planes = scratch.Draw(seed, first, count, kernel);
            Interlocked.Or(ref ran, (int)Sums(matrix, scratch.Planes, planes, sums, first, count, kernel));

            for (var r = 0; r < count; r++)
            {
                var b = first + r;
                var best = -1;
                var row = sums.AsSpan(b * k, k);
                for (var j = 0; j < k; j++)
                {
                    if ((selectable is null || selectable[j]) && (best < 0 || row[j] < row[best])) best = j;
                }

                selected[b] = best;
                var zeros = scratch.Zeros.AsSpan(r * matrix.Stride, matrix.Stride);
                oobSize[b] = Count(zeros, zeros);
                oobErrors[b] = best < 0 ? 0 : Count(matrix.Row(best), zeros);
            }

            return scratch;
        }, _ => { });
        return new BootstrapDraws(resamples, k, sums, selected, oobErrors, oobSize) { Kernels = (BootstrapKernel)ran };
    }

    /// <summary>Every row's weighted loss sum Σ_i w_i·loss_i under each of the given weight vectors, through the same
    /// planes and kernels as <see cref="Run(LossMatrix, int, ulong, bool[], BootstrapKernel, int?)"/> (tests give weights
    /// with any number of planes).</summary>
    /// <returns>Sums[b·K + k] for weight vector b, and the kernels that ran.</returns>
    internal static (int[] Sums, BootstrapKernel Kernels) WeightedSums(LossMatrix matrix, IReadOnlyList<int[]> weights, BootstrapKernel kernel)
    {
        if (!IsSupported(kernel)) throw new ArgumentException($"kernel {kernel} is not supported here", nameof(kernel));
        var sums = new int[checked(weights.Count * matrix.Rows)];
        var scratch = new Scratch(matrix.Size, matrix.Stride);
        BootstrapKernel ran = 0;
        for (var first = 0; first < weights.Count; first += GroupSize)
        {
            var count = Math.Min(GroupSize, weights.Count - first);
            var planes = scratch.Set(weights, first, count, kernel);
            ran |= Sums(matrix, scratch.Planes, planes, sums, first, count, kernel);
        }

        return (sums, ran);
    }

    /// <summary>The in-bag sums of one group with <paramref name="kernel"/>, or with the scalar kernel when the group has
    /// more planes than the vector kernels take; returns the kernel that ran.</summary>
    private static BootstrapKernel Sums(LossMatrix matrix, ulong[] planes, int planeCount, int[] sums, int first, int count, BootstrapKernel kernel)
    {
        var used = planeCount <= MaxVectorPlanes ? kernel : BootstrapKernel.Scalar;
        switch (used)
        {
            case BootstrapKernel.Avx512BW: VectorSums<Wide>(matrix, planes, planeCount, sums, first, count); break;
            case BootstrapKernel.Avx2: VectorSums<Narrow>(matrix, planes, planeCount, sums, first, count); break;
            default: ScalarSums(matrix, planes, planeCount, sums, first, count); break;
        }

        return used;
    }

    private static int Count(ReadOnlySpan<ulong> a, ReadOnlySpan<ulong> b)
    {
        var count = 0;
        for (var w = 0; w < a.Length; w++) count += BitOperations.PopCount(a[w] & b[w]);
        return count;
    }

    /// <summary>Per-thread buffers: the weights of one group and their planes.</summary>
    private sealed class Scratch(int size, int stride)
    {
        // Each resample's counts are padded to whole 64-example words (zeros past n) so that planes are built 64 at a time.
        private readonly int _padded = stride * 64;
        private readonly int[] _counts = new int[GroupSize * stride * 64];

        public ulong[] Planes { get; private set; } = new ulong[GroupSize * 4 * stride];

        public ulong[] Zeros { get; } = new ulong[GroupSize * stride];

        /// <summary>Draws the group's resamples and builds their planes with the plane builder that goes with
        /// <paramref name="kernel"/>; returns the number of planes.</summary>
        public int Draw(ulong seed, int first, int count, BootstrapKernel kernel)
        {
            Array.Clear(_counts);
            for (var r = 0; r < count; r++)
            {
                var random = new ResampleRandom(seed, first + r);
                var counts = _counts.AsSpan(r * _padded, size);
                for (var j = 0; j < size; j++) counts[random.NextBelow(size)]++;
            }

            return Build(count, kernel);
        }

        /// <summary>Takes the group's weights as given (non-negative, n each) and builds their planes; returns the number of planes.</summary>
        public int Set(IReadOnlyList<int[]> weights, int first, int count, BootstrapKernel kernel)
        {
            Array.Clear(_counts);
            for (var r = 0; r < count; r++) weights[first + r].CopyTo(_counts.AsSpan(r * _padded, size));
            return Build(count, kernel);
        }

        private int Build(int count, BootstrapKernel kernel)
        {
            var max = 0;
            for (var r = 0; r < count; r++)
            {
                foreach (var c in _counts.AsSpan(r * _padded, size)) max = Math.Max(max, c);
            }

            var planes = Math.Max(1, 32 - BitOperations.LeadingZeroCount((uint)max));
            if (Planes.Length < GroupSize * planes * stride) Planes = new ulong[GroupSize * planes * stride];
            Array.Clear(Planes, 0, GroupSize * planes * stride);
            Array.Clear(Zeros);
            for (var r = 0; r < count; r++)
            {
                var counts = _counts.AsSpan(r * _padded, _padded);
                var planeSpan = Planes.AsSpan(r * planes * stride, planes * stride);
                var zeros = Zeros.AsSpan(r * stride, stride);
                switch (kernel)
                {
                    case BootstrapKernel.Avx512BW: BuildPlanes<Bits512>(counts, size, planeSpan, planes, stride, zeros); break;
                    case BootstrapKernel.Avx2: BuildPlanes<Bits256>(counts, size, planeSpan, planes, stride, zeros); break;
                    default: BuildPlanes<BitsScalar>(counts, size, planeSpan, planes, stride, zeros); break;
                }
            }

            return planes;
        }

        /// <summary>Plane p of each 64-example word is bit p of its 64 counts; a word of <see cref="Zeros"/> marks the
        /// counts that are zero.</summary>
        private static void BuildPlanes<TBits>(ReadOnlySpan<int> counts, int n, Span<ulong> planes, int planeCount, int stride, Span<ulong> zeros)
            where TBits : struct, IWordBits
        {
            ref var start = ref MemoryMarshal.GetReference(counts);
            var words = (n + 63) / 64;
            for (var w = 0; w < words; w++)
            {
                ref var word = ref Unsafe.Add(ref start, 64 * w);
                // The padding past n counts zero but is not out of bag: it is not an example.
                var valid = Math.Min(64, n - 64 * w);
                var zero = TBits.Zero(ref word);
                zeros[w] = valid == 64 ? zero : zero & ((1UL << valid) - 1);
                for (var p = 0; p < planeCount; p++) planes[p * stride + w] = TBits.Bit(ref word, p);
            }
        }
    }

    /// <summary>Gathers one bit of 64 consecutive counts into a word.</summary>
    private interface IWordBits
    {
        /// <summary>Bit i is set when count i is zero.</summary>
        static abstract ulong Zero(ref int counts);

        /// <summary>Bit i is bit <paramref name="p"/> of count i.</summary>
        static abstract ulong Bit(ref int counts, int p);
    }

    private struct BitsScalar : IWordBits
    {
        public static ulong Zero(ref int counts)
        {
            ulong bits = 0;
            for (var i = 0; i < 64; i++) bits |= (Unsafe.Add(ref counts, i) == 0 ? 1UL : 0UL) << i;
            return bits;
        }

        public static ulong Bit(ref int counts, int p)
        {
            ulong bits = 0;
            for (var i = 0; i < 64; i++) bits |= (((ulong)(uint)Unsafe.Add(ref counts, i) >> p) & 1) << i;
            return bits;
        }
    }

    /// <summary>16 counts at a time: shift bit p to the sign bit and gather the sign bits (VPMOVD2M).</summary>
    private struct Bits512 : IWordBits
    {
        public static ulong Zero(ref int counts)
        {
            ulong bits = 0;
            for (var q = 0; q < 4; q++)
            {
                var c = Vector512.LoadUnsafe(ref counts, (nuint)(16 * q));
                bits |= (ulong)Vector512.Equals(c, Vector512<int>.Zero).ExtractMostSignificantBits() << (16 * q);
            }

            return bits;
        }

        public static ulong Bit(ref int counts, int p)
        {
            ulong bits = 0;
            for (var q = 0; q < 4; q++)
            {
                var c = Vector512.LoadUnsafe(ref counts, (nuint)(16 * q));
                bits |= (ulong)Vector512.ShiftLeft(c, 31 - p).ExtractMostSignificantBits() << (16 * q);
            }

            return bits;
        }
    }

    /// <summary>8 counts at a time: shift bit p to the sign bit and gather the sign bits (VMOVMSKPS).</summary>
    private struct Bits256 : IWordBits
    {
        public static ulong Zero(ref int counts)
        {
            ulong bits = 0;
            for (var q = 0; q < 8; q++)
            {
                var c = Vector256.LoadUnsafe(ref counts, (nuint)(8 * q));
                bits |= (ulong)Vector256.Equals(c, Vector256<int>.Zero).ExtractMostSignificantBits() << (8 * q);
            }

            return bits;
        }

        public static ulong Bit(ref int counts, int p)
        {
            ulong bits = 0;
            for (var q = 0; q < 8; q++)
            {
                var c = Vector256.LoadUnsafe(ref counts, (nuint)(8 * q));
                bits |= (ulong)Vector256.ShiftLeft(c, 31 - p).ExtractMostSignificantBits() << (8 * q);
            }

            return bits;
        }
    }

    private static void ScalarSums(LossMatrix matrix, ulong[] planes, int planeCount, int[] sums, int first, int count)
    {
        var stride = matrix.Stride;
        var k = matrix.Rows;
        for (var row = 0; row < k; row++)
        {
            var loss = matrix.Row(row);
            for (var r = 0; r < count; r++)
            {
                long sum = 0;
                for (var p = 0; p < planeCount; p++)
                {
                    var plane = planes.AsSpan((r * planeCount + p) * stride, stride);
                    long bits = 0;
                    for (var w = 0; w < stride; w++) bits += BitOperations.PopCount(loss[w] & plane[w]);
                    sum += bits << p;
                }

                sums[(first + r) * k + row] = checked((int)sum);
            }
        }
    }

    private static void VectorSums<TWidth>(LossMatrix matrix, ulong[] planes, int planeCount, int[] sums, int first, int count)
        where TWidth : struct, IWidth
    {
        // One instantiation per plane count, so that the plane loop is unrolled and its lookup tables stay in registers.
        switch (planeCount)
        {
            case 1: VectorSums<TWidth, One>(matrix, planes, sums, first, count); break;
            case 2: VectorSums<TWidth, Two>(matrix, planes, sums, first, count); break;
            case 3: VectorSums<TWidth, Three>(matrix, planes, sums, first, count); break;
            case 4: VectorSums<TWidth, Four>(matrix, planes, sums, first, count); break;
            default: VectorSums<TWidth, Five>(matrix, planes, sums, first, count); break;
        }
    }

    private interface IPlaneCount
    {
        static abstract int Count { get; }
    }

    private struct One : IPlaneCount { public static int Count => 1; }

    private struct Two : IPlaneCount { public static int Count => 2; }

    private struct Three : IPlaneCount { public static int Count => 3; }

    private struct Four : IPlaneCount { public static int Count => 4; }

    private struct Five : IPlaneCount { public static int Count => 5; }

    private static void VectorSums<TWidth, TPlanes>(LossMatrix matrix, ulong[] planes, int[] sums, int first, int count)
        where TWidth : struct, IWidth
        where TPlanes : struct, IPlaneCount
    {
        var stride = matrix.Stride;
        var k = matrix.Rows;
        ref var lossBase = ref MemoryMarshal.GetArrayDataReference(matrix.Bits);
        ref var planeBase = ref MemoryMarshal.GetArrayDataReference(planes);
        Span<ulong> four = stackalloc ulong[GroupSize];
        for (var row = 0; row < k; row++)
        {
            TWidth.Row<TPlanes>(ref Unsafe.Add(ref lossBase, row * stride), ref planeBase, (nuint)stride, four);
            for (var r = 0; r < count; r++) sums[(first + r) * k + row] = checked((int)four[r]);
        }
    }

    /// <summary>One vector width of the nibble-lookup kernel.</summary>
    private interface IWidth
    {
        /// <summary>For each of the group's four resamples r, Σ_p 2^p·popcount(loss AND plane_{r,p}) over one loss row of
        /// <paramref name="stride"/> words; the planes of resample r, plane p start at word (r·P + p)·stride.</summary>
        static abstract void Row<TPlanes>(ref ulong loss, ref ulong planes, nuint stride, Span<ulong> four)
            where TPlanes : struct, IPlaneCount;
    }

    /// <summary>AVX-512BW: 512 examples per instruction.</summary>
    private struct Wide : IWidth
    {
        private static readonly Vector512<byte> P0 = Vector512.Create(Luts[0]), P1 = Vector512.Create(Luts[1]),
            P2 = Vector512.Create(Luts[2]), P3 = Vector512.Create(Luts[3]), P4 = Vector512.Create(Luts[4]);

        public static void Row<TPlanes>(ref ulong loss, ref ulong planes, nuint stride, Span<ulong> four)
            where TPlanes : struct, IPlaneCount
        {
            // The tables in locals, so that the JIT keeps them in registers.
            var t = new Tables512(P0, P1, P2, P3, P4);
            var group = (nuint)TPlanes.Count * stride;
            Vector512<ulong> a0 = default, a1 = default, a2 = default, a3 = default;
            for (nuint w = 0; w < stride; w += (nuint)Vector512<ulong>.Count)
            {
                var l = Vector512.LoadUnsafe(ref loss, w);
                a0 += Weighted<TPlanes>(l, ref planes, w, stride, t);
                a1 += Weighted<TPlanes>(l, ref planes, group + w, stride, t);
                a2 += Weighted<TPlanes>(l, ref planes, 2 * group + w, stride, t);
                a3 += Weighted<TPlanes>(l, ref planes, 3 * group + w, stride, t);
            }

            four[0] = Vector512.Sum(a0);
            four[1] = Vector512.Sum(a1);
            four[2] = Vector512.Sum(a2);
            four[3] = Vector512.Sum(a3);
        }

        /// <summary>Σ_p 2^p·popcount(loss AND plane_p) over one 512-bit block, as eight partial sums.</summary>
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        private static Vector512<ulong> Weighted<TPlanes>(Vector512<ulong> loss, ref ulong planes, nuint offset, nuint stride, in Tables512 t)
            where TPlanes : struct, IPlaneCount
        {
            var bytes = Lookup(loss & Vector512.LoadUnsafe(ref planes, offset), t.P0, t.Nibble);
            if (TPlanes.Count > 1) bytes += Lookup(loss & Vector512.LoadUnsafe(ref planes, offset + stride), t.P1, t.Nibble);
            if (TPlanes.Count > 2) bytes += Lookup(loss & Vector512.LoadUnsafe(ref planes, offset + 2 * stride), t.P2, t.Nibble);
            if (TPlanes.Count > 3) bytes += Lookup(loss & Vector512.LoadUnsafe(ref planes, offset + 3 * stride), t.P3, t.Nibble);
            if (TPlanes.Count > 4) bytes += Lookup(loss & Vector512.LoadUnsafe(ref planes, offset + 4 * stride), t.P4, t.Nibble);
            return Avx512BW.SumAbsoluteDifferences(bytes, Vector512<byte>.Zero).AsUInt64();
        }

        /// <summary>Per byte, the table's value for its low nibble plus its value for its high nibble.</summary>
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        private static Vector512<byte> Lookup(Vector512<ulong> x, Vector512<byte> table, Vector512<byte> nibble)
        {
            var high = Vector512.ShiftRightLogical(x, 4).AsByte() & nibble;
            return Avx512BW.Shuffle(table, x.AsByte() & nibble) + Avx512BW.Shuffle(table, high);
        }
    }

    private readonly struct Tables512(Vector512<byte> p0, Vector512<byte> p1, Vector512<byte> p2, Vector512<byte> p3, Vector512<byte> p4)
    {
        public readonly Vector512<byte> Nibble = Vector512.Create((byte)0x0F);
        public readonly Vector512<byte> P0 = p0, P1 = p1, P2 = p2, P3 = p3, P4 = p4;
    }

    /// <summary>AVX2: 256 examples per instruction. VPSHUFB looks up within each 128-bit lane, so each table is the
    /// 16-byte one twice.</summary>
    private struct Narrow : IWidth
    {
        private static readonly Vector256<byte> P0 = Vector256.Create(Luts[0]), P1 = Vector256.Create(Luts[1]),
            P2 = Vector256.Create(Luts[2]), P3 = Vector256.Create(Luts[3]), P4 = Vector256.Create(Luts[4]);

        public static void Row<TPlanes>(ref ulong loss, ref ulong planes, nuint stride, Span<ulong> four)
            where TPlanes : struct, IPlaneCount
        {
            var t = new Tables256(P0, P1, P2, P3, P4);
            var group = (nuint)TPlanes.Count * stride;
            Vector256<ulong> a0 = default, a1 = default, a2 = default, a3 = default;
            for (nuint w = 0; w < stride; w += (nuint)Vector256<ulong>.Count)
            {
                var l = Vector256.LoadUnsafe(ref loss, w);
                a0 += Weighted<TPlanes>(l, ref planes, w, stride, t);
                a1 += Weighted<TPlanes>(l, ref planes, group + w, stride, t);
                a2 += Weighted<TPlanes>(l, ref planes, 2 * group + w, stride, t);
                a3 += Weighted<TPlanes>(l, ref planes, 3 * group + w, stride, t);
            }

            four[0] = Vector256.Sum(a0);
            four[1] = Vector256.Sum(a1);
            four[2] = Vector256.Sum(a2);
            four[3] = Vector256.Sum(a3);
        }

        /// <summary>Σ_p 2^p·popcount(loss AND plane_p) over one 256-bit block, as four partial sums.</summary>
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        private static Vector256<ulong> Weighted<TPlanes>(Vector256<ulong> loss, ref ulong planes, nuint offset, nuint stride, in Tables256 t)
            where TPlanes : struct, IPlaneCount
        {
            var bytes = Lookup(loss & Vector256.LoadUnsafe(ref planes, offset), t.P0, t.Nibble);
            if (TPlanes.Count > 1) bytes += Lookup(loss & Vector256.LoadUnsafe(ref planes, offset + stride), t.P1, t.Nibble);
            if (TPlanes.Count > 2) bytes += Lookup(loss & Vector256.LoadUnsafe(ref planes, offset + 2 * stride), t.P2, t.Nibble);
            if (TPlanes.Count > 3) bytes += Lookup(loss & Vector256.LoadUnsafe(ref planes, offset + 3 * stride), t.P3, t.Nibble);
            if (TPlanes.Count > 4) bytes += Lookup(loss & Vector256.LoadUnsafe(ref planes, offset + 4 * stride), t.P4, t.Nibble);
            return Avx2.SumAbsoluteDifferences(bytes, Vector256<byte>.Zero).AsUInt64();
        }

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        private static Vector256<byte> Lookup(Vector256<ulong> x, Vector256<byte> table, Vector256<byte> nibble)
        {
            var high = Vector256.ShiftRightLogical(x, 4).AsByte() & nibble;
            return Avx2.Shuffle(table, x.AsByte() & nibble) + Avx2.Shuffle(table, high);
        }
    }

    private readonly struct Tables256(Vector256<byte> p0, Vector256<byte> p1, Vector256<byte> p2, Vector256<byte> p3, Vector256<byte> p4)
    {
        public readonly Vector256<byte> Nibble = Vector256.Create((byte)0x0F);
        public readonly Vector256<byte> P0 = p0, P1 = p1, P2 = p2, P3 = p3, P4 = p4;
    }

    /// <summary>Per plane p, the 16-byte table popcount(v)·2^p for every nibble v; the sum of a byte's two lookups over
    /// five planes is at most 8·(2^5 − 1) = 248, so it fits a byte.</summary>
    private static Vector128<byte>[] BuildLuts()
    {
        var luts = new Vector128<byte>[MaxVectorPlanes];
        for (var p = 0; p < MaxVectorPlanes; p++)
        {
            var table = new byte[16];
            for (var v = 0; v < 16; v++) table[v] = (byte)(BitOperations.PopCount((uint)v) << p);
            luts[p] = Vector128.Create(table);
        }

        return luts;
    }
}
