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
public sealed record BootstrapDraws(int Resamples, int Rows, int[] Sums, int[] Selected, int[] OutOfBagErrors, int[] OutOfBagSize);

/// <summary>
/// The bootstrap on 0/1 loss bitsets. A resample is a multiset of n row indices drawn uniformly with replacement
/// (its weights are Multinomial(n; 1/n, …, 1/n)); a look's in-bag loss is Σ_i w_i·loss_i. The weights are split into
/// bit planes (w = Σ_p 2^p·bit_p), so that the weighted sum over a 0/1 loss row is Σ_p 2^p·popcount(loss AND plane_p):
/// 512 examples per vector instruction instead of one multiply-add each.
/// </summary>
/// <remarks>
/// Resamples are processed in groups of four, spread over cores with <see cref="Parallel.For(int, int, Action{int})"/>;
/// each group draws its weights, builds its planes (a few kilobytes, kept in cache) and sweeps every loss row once.
/// Each resample's random stream depends only on the seed and its index (<see cref="ResampleRandom"/>), so the result is
/// the same on any number of threads. With AVX-512BW the popcount uses the nibble lookup of Muła, Kurz &amp; Lemire
/// (2018, Computer Journal 61:111): VPSHUFB on each nibble, with one lookup table per plane pre-multiplied by 2^p, and
/// VPSADBW to add the bytes; elsewhere it is the scalar POPCNT.
/// </remarks>
public static class BootstrapEngine
{
    /// <summary>Resamples handled together: their planes share one pass over the loss rows.</summary>
    public const int GroupSize = 4;

    /// <summary>Planes the vector kernel handles: 8 bits × (2^5 − 1) = 248 still fits a byte.</summary>
    private const int MaxVectorPlanes = 5;

    private static readonly Vector512<byte>[] Luts = BuildLuts();

    /// <summary>Whether the AVX-512 kernel is used on this machine.</summary>
    public static bool Vectorized => Avx512BW.IsSupported;

    /// <summary>Draws <paramref name="resamples"/> bootstrap resamples of the examples and computes every row's in-bag sum.</summary>
    /// <param name="matrix">The looks' losses.</param>
    /// <param name="resamples">B, at least 1.</param>
    /// <param name="seed">The seed; the same seed gives the same draws.</param>
    /// <param name="selectable">Which rows a resample may select (for the out-of-bag score); null means all.</param>
    /// <param name="vector">Allow the vector kernel (tests compare both).</param>
    /// <param name="maxThreads">At most this many threads; null for all cores.</param>
    public static BootstrapDraws Run(LossMatrix matrix, int resamples, ulong seed, bool[]? selectable = null, bool vector = true, int? maxThreads = null)
    {
        ArgumentNullException.ThrowIfNull(matrix);
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
        Parallel.For(0, groups, options, () => new Scratch(matrix.Size, matrix.Stride), (g, _, scratch) =>
        {
            var first = g * GroupSize;
            var count = Math.Min(GroupSize, resamples - first);
            var planes = scratch.Draw(seed, first, count);
            if (vector && Avx512BW.IsSupported && planes <= MaxVectorPlanes)
            {
                VectorSums(matrix, scratch.Planes, planes, sums, first, count);
            }
            else
            {
                ScalarSums(matrix, scratch.Planes, planes, sums, first, count);
            }

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
        return new BootstrapDraws(resamples, k, sums, selected, oobErrors, oobSize);
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

        /// <summary>Draws the group's resamples and builds their planes; returns the number of planes.</summary>
        public int Draw(ulong seed, int first, int count)
        {
            Array.Clear(_counts);
            var max = 0;
            for (var r = 0; r < count; r++)
            {
                var random = new ResampleRandom(seed, first + r);
                var counts = _counts.AsSpan(r * _padded, size);
                for (var j = 0; j < size; j++) counts[random.NextBelow(size)]++;
                foreach (var c in counts) max = Math.Max(max, c);
            }

            var planes = Math.Max(1, 32 - BitOperations.LeadingZeroCount((uint)max));
            if (Planes.Length < GroupSize * planes * stride) Planes = new ulong[GroupSize * planes * stride];
            Array.Clear(Planes, 0, GroupSize * planes * stride);
            Array.Clear(Zeros);
            for (var r = 0; r < count; r++)
            {
                var planeSpan = Planes.AsSpan(r * planes * stride, planes * stride);
                var zeros = Zeros.AsSpan(r * stride, stride);
                if (Vector512.IsHardwareAccelerated && planes <= 8)
                {
                    BuildPlanesVector(_counts.AsSpan(r * _padded, _padded), size, planeSpan, planes, stride, zeros);
                }
                else
                {
                    BuildPlanes(_counts.AsSpan(r * _padded, size), planeSpan, planes, stride, zeros);
                }
            }

            return planes;
        }

        /// <summary>Bit p of 16 counts at a time: shift it to the sign bit and gather the sign bits (VPMOVD2M).</summary>
        private static void BuildPlanesVector(ReadOnlySpan<int> counts, int n, Span<ulong> planes, int planeCount, int stride, Span<ulong> zeros)
        {
            ref var start = ref MemoryMarshal.GetReference(counts);
            var words = (n + 63) / 64;
            for (var w = 0; w < words; w++)
            {
                ulong zero = 0, p0 = 0, p1 = 0, p2 = 0, p3 = 0, p4 = 0, p5 = 0, p6 = 0, p7 = 0;
                for (var q = 0; q < 4; q++)
                {
                    var c = Vector512.LoadUnsafe(ref start, (nuint)(64 * w + 16 * q));
                    var shift = 16 * q;
                    zero |= (ulong)Vector512.Equals(c, Vector512<int>.Zero).ExtractMostSignificantBits() << shift;
                    p0 |= (ulong)Vector512.ShiftLeft(c, 31).ExtractMostSignificantBits() << shift;
                    if (planeCount > 1) p1 |= (ulong)Vector512.ShiftLeft(c, 30).ExtractMostSignificantBits() << shift;
                    if (planeCount > 2) p2 |= (ulong)Vector512.ShiftLeft(c, 29).ExtractMostSignificantBits() << shift;
                    if (planeCount > 3) p3 |= (ulong)Vector512.ShiftLeft(c, 28).ExtractMostSignificantBits() << shift;
                    if (planeCount > 4) p4 |= (ulong)Vector512.ShiftLeft(c, 27).ExtractMostSignificantBits() << shift;
                    if (planeCount > 5) p5 |= (ulong)Vector512.ShiftLeft(c, 26).ExtractMostSignificantBits() << shift;
                    if (planeCount > 6) p6 |= (ulong)Vector512.ShiftLeft(c, 25).ExtractMostSignificantBits() << shift;
                    if (planeCount > 7) p7 |= (ulong)Vector512.ShiftLeft(c, 24).ExtractMostSignificantBits() << shift;
                }

                // The padding past n counts zero but is not out of bag: it is not an example.
                var valid = Math.Min(64, n - 64 * w);
                zeros[w] = valid == 64 ? zero : zero & ((1UL << valid) - 1);
                planes[w] = p0;
                if (planeCount > 1) planes[stride + w] = p1;
                if (planeCount > 2) planes[2 * stride + w] = p2;
                if (planeCount > 3) planes[3 * stride + w] = p3;
                if (planeCount > 4) planes[4 * stride + w] = p4;
                if (planeCount > 5) planes[5 * stride + w] = p5;
                if (planeCount > 6) planes[6 * stride + w] = p6;
                if (planeCount > 7) planes[7 * stride + w] = p7;
            }
        }

        private static void BuildPlanes(ReadOnlySpan<int> counts, Span<ulong> planes, int planeCount, int stride, Span<ulong> zeros)
        {
            var n = counts.Length;
            for (var w = 0; w * 64 < n; w++)
            {
                var start = w * 64;
                var end = Math.Min(n, start + 64);
                ulong p0 = 0, p1 = 0, p2 = 0, p3 = 0, zero = 0;
                for (var i = start; i < end; i++)
                {
                    var c = (ulong)counts[i];
                    var t = i - start;
                    p0 |= (c & 1) << t;
                    p1 |= ((c >> 1) & 1) << t;
                    p2 |= ((c >> 2) & 1) << t;
                    p3 |= ((c >> 3) & 1) << t;
                    zero |= (c == 0 ? 1UL : 0UL) << t;
                }

                planes[w] = p0;
                if (planeCount > 1) planes[stride + w] = p1;
                if (planeCount > 2) planes[2 * stride + w] = p2;
                if (planeCount > 3) planes[3 * stride + w] = p3;
                zeros[w] = zero;
                for (var p = 4; p < planeCount; p++)
                {
                    ulong bits = 0;
                    for (var i = start; i < end; i++) bits |= (((ulong)counts[i] >> p) & 1) << (i - start);
                    planes[p * stride + w] = bits;
                }
            }
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

    private static void VectorSums(LossMatrix matrix, ulong[] planes, int planeCount, int[] sums, int first, int count)
    {
        // One instantiation per plane count, so that the plane loop is unrolled and its lookup tables stay in registers.
        switch (planeCount)
        {
            case 1: VectorSums<One>(matrix, planes, sums, first, count); break;
            case 2: VectorSums<Two>(matrix, planes, sums, first, count); break;
            case 3: VectorSums<Three>(matrix, planes, sums, first, count); break;
            case 4: VectorSums<Four>(matrix, planes, sums, first, count); break;
            default: VectorSums<Five>(matrix, planes, sums, first, count); break;
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

    private static void VectorSums<TPlanes>(LossMatrix matrix, ulong[] planes, int[] sums, int first, int count)
        where TPlanes : struct, IPlaneCount
    {
        var stride = matrix.Stride;
        var k = matrix.Rows;
        ref var lossBase = ref MemoryMarshal.GetArrayDataReference(matrix.Bits);
        ref var planeBase = ref MemoryMarshal.GetArrayDataReference(planes);
        var groupStride = (nuint)(TPlanes.Count * stride);
        var planeStride = (nuint)stride;
        var luts = new Tables(Luts);
        for (var row = 0; row < k; row++)
        {
            var rowStart = (nuint)(row * stride);
            Vector512<ulong> a0 = default, a1 = default, a2 = default, a3 = default;
            for (nuint w = 0; w < (nuint)stride; w += LossMatrix.BlockWords)
            {
                var loss = Vector512.LoadUnsafe(ref lossBase, rowStart + w);
                a0 += Weighted<TPlanes>(loss, ref planeBase, w, planeStride, luts);
                a1 += Weighted<TPlanes>(loss, ref planeBase, groupStride + w, planeStride, luts);
                a2 += Weighted<TPlanes>(loss, ref planeBase, 2 * groupStride + w, planeStride, luts);
                a3 += Weighted<TPlanes>(loss, ref planeBase, 3 * groupStride + w, planeStride, luts);
            }

            sums[first * k + row] = (int)Vector512.Sum(a0);
            if (count > 1) sums[(first + 1) * k + row] = (int)Vector512.Sum(a1);
            if (count > 2) sums[(first + 2) * k + row] = (int)Vector512.Sum(a2);
            if (count > 3) sums[(first + 3) * k + row] = (int)Vector512.Sum(a3);
        }
    }

    /// <summary>The per-plane lookup tables, held in locals so that the JIT keeps them in registers.</summary>
    private readonly struct Tables(Vector512<byte>[] luts)
    {
        public readonly Vector512<byte> Nibble = Vector512.Create((byte)0x0F);
        public readonly Vector512<byte> P0 = luts[0], P1 = luts[1], P2 = luts[2], P3 = luts[3], P4 = luts[4];
    }

    /// <summary>Σ_p 2^p·popcount(loss AND plane_p) over one 512-bit block, as eight partial sums.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static Vector512<ulong> Weighted<TPlanes>(Vector512<ulong> loss, ref ulong planeBase, nuint offset, nuint planeStride, in Tables t)
        where TPlanes : struct, IPlaneCount
    {
        var bytes = Lookup(loss & Vector512.LoadUnsafe(ref planeBase, offset), t.P0, t.Nibble);
        if (TPlanes.Count > 1) bytes += Lookup(loss & Vector512.LoadUnsafe(ref planeBase, offset + planeStride), t.P1, t.Nibble);
        if (TPlanes.Count > 2) bytes += Lookup(loss & Vector512.LoadUnsafe(ref planeBase, offset + 2 * planeStride), t.P2, t.Nibble);
        if (TPlanes.Count > 3) bytes += Lookup(loss & Vector512.LoadUnsafe(ref planeBase, offset + 3 * planeStride), t.P3, t.Nibble);
        if (TPlanes.Count > 4) bytes += Lookup(loss & Vector512.LoadUnsafe(ref planeBase, offset + 4 * planeStride), t.P4, t.Nibble);
        return Avx512BW.SumAbsoluteDifferences(bytes, Vector512<byte>.Zero).AsUInt64();
    }

    /// <summary>Per byte, the table's value for its low nibble plus its value for its high nibble.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static Vector512<byte> Lookup(Vector512<ulong> x, Vector512<byte> table, Vector512<byte> nibble)
    {
        var bytes = x.AsByte();
        var high = Vector512.ShiftRightLogical(x, 4).AsByte() & nibble;
        return Avx512BW.Shuffle(table, bytes & nibble) + Avx512BW.Shuffle(table, high);
    }

    private static Vector512<byte>[] BuildLuts()
    {
        var luts = new Vector512<byte>[MaxVectorPlanes];
        for (var p = 0; p < MaxVectorPlanes; p++)
        {
            var table = new byte[16];
            for (var v = 0; v < 16; v++) table[v] = (byte)(BitOperations.PopCount((uint)v) << p);
            luts[p] = Vector512.Create(Vector128.Create(table));
        }

        return luts;
    }
}
