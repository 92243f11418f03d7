using System.Runtime.Intrinsics.X86;
using Accountant.Bounds;
using Accountant.Estimates;
using Xunit.Abstractions;

namespace Accountant.Tests.Estimates;

/// <summary>
/// The bit-plane engine against a straightforward reference: draw n row indices per resample from the same random
/// stream, add up the drawn rows' losses one by one, select the lowest, score it on the rows never drawn. Same seed,
/// same result, exactly (these are integer counts). Every kernel this machine can run (scalar always; AVX2 and
/// AVX-512BW when the runtime reports them) is checked on its own, so that a machine with AVX2 only tests its AVX2 path.
/// </summary>
public class BootstrapEngineTests(ITestOutputHelper output)
{
    /// <summary>The kernels this machine can run, by the runtime's own hardware checks, not the engine's.</summary>
    internal static BootstrapKernel[] Kernels() =>
    [
        BootstrapKernel.Scalar,
        .. Avx2.IsSupported ? [BootstrapKernel.Avx2] : Array.Empty<BootstrapKernel>(),
        .. Avx512BW.IsSupported ? [BootstrapKernel.Avx512BW] : Array.Empty<BootstrapKernel>(),
    ];

    /// <summary>The reference: one resample, row by row, as the definition reads.</summary>
    internal static (int[] Sums, int Selected, int OobErrors, int OobSize) Reference(bool[][] losses, int n, ulong seed, int resample, bool[]? selectable)
    {
        var random = new ResampleRandom(seed, resample);
        var drawn = new int[n];
        for (var j = 0; j < n; j++) drawn[random.NextBelow(n)]++;
        var sums = losses.Select(row => Enumerable.Range(0, n).Sum(i => row[i] ? drawn[i] : 0)).ToArray();
        var selected = -1;
        for (var k = 0; k < losses.Length; k++)
        {
            if ((selectable?[k] ?? true) && (selected < 0 || sums[k] < sums[selected])) selected = k;
        }

        var oobSize = drawn.Count(c => c == 0);
        var oobErrors = selected < 0 ? 0 : Enumerable.Range(0, n).Count(i => drawn[i] == 0 && losses[selected][i]);
        return (sums, selected, oobErrors, oobSize);
    }

    internal static bool[][] RandomLosses(int rows, int n, double rate, int seed)
    {
        var random = new Random(seed);
        return Enumerable.Range(0, rows).Select(_ => Enumerable.Range(0, n).Select(_ => random.NextDouble() < rate).ToArray()).ToArray();
    }

    internal static LossMatrix Matrix(bool[][] losses, int n) => LossMatrix.FromFunction(losses.Length, n, (k, i) => losses[k][i]);

    [Theory]
    [InlineData(1, 1, 3, 11UL)]
    [InlineData(3, 7, 5, 2UL)]
    [InlineData(9, 64, 4, 3UL)]
    [InlineData(6, 100, 9, 4UL)]
    [InlineData(13, 513, 10, 5UL)]
    [InlineData(5, 2000, 6, 6UL)]
    public void Engine_equals_the_reference_for_every_kernel(int rows, int n, int resamples, ulong seed)
    {
        var losses = RandomLosses(rows, n, 0.3, (int)seed);
        var matrix = Matrix(losses, n);
        var selectable = Enumerable.Range(0, rows).Select(k => k % 4 != 1 || rows == 1).ToArray();
        foreach (var kernel in Kernels())
        {
            var draws = BootstrapEngine.Run(matrix, resamples, seed, selectable, kernel, maxThreads: null);
            // Multinomial(n; 1/n, …) counts of 32 or more need six planes; at these n they do not occur, so the
            // requested kernel computed every group.
            Assert.Equal(kernel, draws.Kernels);
            for (var b = 0; b < resamples; b++)
            {
                var (sums, selected, oobErrors, oobSize) = Reference(losses, n, seed, b, selectable);
                Assert.Equal(sums, draws.Sums.AsSpan(b * rows, rows).ToArray());
                Assert.Equal(selected, draws.Selected[b]);
                Assert.Equal(oobErrors, draws.OutOfBagErrors[b]);
                Assert.Equal(oobSize, draws.OutOfBagSize[b]);
            }
        }
    }

    [Fact]
    public void The_engine_runs_the_widest_kernel_the_hardware_has()
    {
        // The expectation comes from the runtime's hardware checks (System.Runtime.Intrinsics.X86), the order from the
        // engine's design: AVX-512BW over AVX2 over scalar. On an AVX2-only machine this is the AVX2 kernel.
        var expected = Avx512BW.IsSupported ? BootstrapKernel.Avx512BW : Avx2.IsSupported ? BootstrapKernel.Avx2 : BootstrapKernel.Scalar;
        var losses = RandomLosses(7, 300, 0.3, 1);
        var draws = BootstrapEngine.Run(Matrix(losses, 300), 9, 1);
        output.WriteLine($"kernel that ran: {draws.Kernels}; AVX2 {Avx2.IsSupported}, AVX-512BW {Avx512BW.IsSupported}");
        Assert.Equal(expected, BootstrapEngine.Kernel);
        Assert.Equal(expected, draws.Kernels);
        Assert.Equal(BootstrapKernel.Scalar, BootstrapEngine.Run(Matrix(losses, 300), 9, 1, vector: false).Kernels);
        foreach (var missing in new[] { BootstrapKernel.Avx2, BootstrapKernel.Avx512BW }.Except(Kernels()))
        {
            Assert.Throws<ArgumentException>(() => BootstrapEngine.Run(Matrix(losses, 300), 9, 1, null, missing, null));
        }
    }

    [Theory]
    [InlineData(1, 3, 1)]
    [InlineData(2, 7, 2)]
    [InlineData(3, 700, 3)]
    [InlineData(4, 1025, 5)]
    [InlineData(5, 2000, 9)]
    [InlineData(6, 513, 7)]
    [InlineData(7, 64, 6)]
    public void Weighted_sums_equal_the_definition_for_every_plane_count(int planes, int n, int vectors)
    {
        // Weights drawn uniformly from [0, 2^planes), with the largest value forced into each group of four, so every
        // group has exactly that many bit planes: 1 to 5 run the vector kernels, 6 and 7 fall back to scalar. The
        // reference is Σ_i w_i·loss_i written out, as the definition reads.
        var random = new Random(planes * 1000 + n);
        var losses = RandomLosses(11, n, 0.4, planes);
        var matrix = Matrix(losses, n);
        var weights = Enumerable.Range(0, vectors).Select(_ => Enumerable.Range(0, n).Select(_ => random.Next(1 << planes)).ToArray()).ToArray();
        for (var v = 0; v < vectors; v += BootstrapEngine.GroupSize) weights[v][random.Next(n)] = (1 << planes) - 1;
        foreach (var kernel in Kernels())
        {
            var (sums, ran) = BootstrapEngine.WeightedSums(matrix, weights, kernel);
            Assert.Equal(planes <= 5 ? kernel : BootstrapKernel.Scalar, ran);
            for (var v = 0; v < vectors; v++)
            {
                for (var k = 0; k < losses.Length; k++)
                {
                    var expected = 0;
                    for (var i = 0; i < n; i++) expected += losses[k][i] ? weights[v][i] : 0;
                    Assert.Equal(expected, sums[v * losses.Length + k]);
                }
            }
        }
    }

    [Fact]
    public void The_result_does_not_depend_on_the_number_of_threads_and_changes_with_the_seed()
    {
        var losses = RandomLosses(40, 700, 0.2, 9);
        var matrix = Matrix(losses, 700);
        var one = BootstrapEngine.Run(matrix, 37, 42, maxThreads: 1);
        var two = BootstrapEngine.Run(matrix, 37, 42, maxThreads: 2);
        var other = BootstrapEngine.Run(matrix, 37, 43, maxThreads: 2);
        Assert.Equal(one.Sums, two.Sums);
        Assert.Equal(one.Selected, two.Selected);
        Assert.NotEqual(one.Sums, other.Sums);
    }

    [Fact]
    public void A_look_that_errs_everywhere_has_in_bag_sum_n_and_one_that_never_errs_zero()
    {
        // Resample weights are Multinomial(n; 1/n, …): they add up to n in every resample.
        var matrix = LossMatrix.FromFunction(2, 1000, (k, _) => k == 0);
        var draws = BootstrapEngine.Run(matrix, 20, 8);
        for (var b = 0; b < 20; b++)
        {
            Assert.Equal(1000, draws.Sums[2 * b]);
            Assert.Equal(0, draws.Sums[2 * b + 1]);
            // About e^−1 of the examples are out of bag (1 − 1/n)^n → 1/e; 368 ± 5 SD of 15 (binomial, arithmetic).
            Assert.InRange(draws.OutOfBagSize[b], 368 - 75, 368 + 75);
        }
    }

    [Fact]
    public void Padding_bits_past_n_in_a_stored_bitset_are_ignored()
    {
        // 10 examples in 2 bytes; the 6 spare bits of the second byte are set, as a hand-made blob might have them.
        var matrix = LossMatrix.FromBitsets(10, [[0b0000_0011, 0b1111_1100]]);
        Assert.Equal(2, matrix.Errors[0]);
    }

    [Fact]
    public void Estimates_equal_a_reference_computed_from_the_reference_draws()
    {
        // BBC (Tsamardinos et al. 2018) and the max statistic (Romano & Wolf 2005) computed from the reference draws
        // with plain loops, against the library on the same seed.
        const int rows = 12, n = 300, resamples = 50;
        const ulong seed = 77;
        var losses = RandomLosses(rows, n, 0.25, 5);
        var matrix = Matrix(losses, n);
        var selectable = Enumerable.Repeat(true, rows).ToArray();
        foreach (var sided in new[] { Sidedness.OneSided, Sidedness.TwoSided })
        {
            var result = BootstrapEstimates.Run(matrix, selectable, 3, new BootstrapSettings { Resamples = resamples, Seed = seed, Confidence = 0.9, Sided = sided });
            var observed = losses.Select(r => r.Count(x => x) / (double)n).ToArray();
            var scale = observed.Select(e => Math.Sqrt(Math.Max(e * (1 - e), 1.0 / n) / n)).ToArray();
            var oob = new List<double>();
            var maxima = new List<double>();
            for (var b = 0; b < resamples; b++)
            {
                var (sums, _, oobErrors, oobSize) = Reference(losses, n, seed, b, null);
                oob.Add(oobErrors / (double)oobSize);
                maxima.Add(Enumerable.Range(0, rows).Max(k =>
                {
                    // Studentized: divided by the resample's own standard error.
                    var resampled = sums[k] / (double)n;
                    var d = (observed[k] - resampled) / Math.Sqrt(Math.Max(resampled * (1 - resampled), 1.0 / n) / n);
                    return sided == Sidedness.TwoSided ? Math.Abs(d) : d;
                }));
            }

            oob.Sort();
            maxima.Sort();
            Assert.Equal(oob.Average(), result.BiasCorrection.Estimate, 12);
            // Type-1 quantiles (inverse empirical CDF): the ⌈q·B⌉-th smallest of 50.
            Assert.Equal(sided == Sidedness.TwoSided ? oob[47] : oob[44], result.BiasCorrection.Upper, 12);
            Assert.Equal(maxima[44], result.MaxBootstrap.CriticalValue, 12);
            Assert.Equal(Math.Min(1, observed[3] + maxima[44] * scale[3]), result.MaxBootstrap.Upper, 12);
        }
    }
}
