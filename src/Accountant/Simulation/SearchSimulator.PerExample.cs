using System.Numerics;
using Accountant.Bounds;
using Accountant.Comparisons;

namespace Accountant.Simulation;

public static partial class SearchSimulator
{
    /// <summary>The methods of a per-example simulation, in the order they are reported; the last row is the selection row.</summary>
    public static readonly string[] PerExampleMethods = [BinomialUnion.Name, KlUnion.Name, HoeffdingUnion.Name, ChainedBinomial.Name, SmallestGuarantee];

    /// <summary>The row that takes, in each search, the smallest of the listed guarantees (what a statement's tightest line shows).</summary>
    public const string SmallestGuarantee = "smallest-listed";

    /// <summary>
    /// Non-adaptive searches simulated example by example, under the same correlation model as the counts (a share ρ of the
    /// examples is shared by every look, and a shared example is everyone's mistake with probability p_min; elsewhere each look
    /// errs on its own with probability q): the losses are drawn as bitsets, exactly, by geometric skips over the examples (a
    /// Bernoulli process), so that chained-binomial and its majority anchor can be computed from them as a statement computes
    /// them from a ledger.
    /// </summary>
    private static SimulationResult RunPerExample(SimulationOptions options, IProgress<int>? progress, CancellationToken cancel)
    {
        var n = options.HoldoutSize;
        var k = options.Looks;
        var delta = 1 - options.Confidence;
        var logK = Math.Log(k);
        var caches = new[]
        {
            new BoundCache(n, c => BinomialUnion.BoundLog(c, n, logK, delta).Upper),
            new BoundCache(n, c => KlUnion.Bound(c / (double)n, n, logK, delta).Upper),
            new BoundCache(n, c => Math.Min(1, c / (double)n + HoeffdingUnion.MarginLog(n, logK, delta))),
        };

        const int chunk = 64;
        var chunks = (options.Repetitions + chunk - 1) / chunk;
        var partial = new Totals[chunks];
        var done = 0;
        Parallel.For(0, chunks, new ParallelOptions { CancellationToken = cancel, MaxDegreeOfParallelism = Environment.ProcessorCount }, c =>
        {
            var local = new Totals(PerExampleMethods.Length);
            var bounds = new double[PerExampleMethods.Length];
            var draw = new LossDraw(n, k);
            for (var r = c * chunk; r < Math.Min(options.Repetitions, (c + 1) * chunk); r++)
            {
                var random = FastRandom.For(options.Seed, r);
                draw.Search(options, random);
                var best = draw.Best;
                var count = draw.Errors[best];
                for (var i = 0; i < caches.Length; i++) bounds[i] = caches[i][count];
                bounds[3] = draw.Chained(delta);
                bounds[4] = Math.Min(bounds[0], Math.Min(bounds[1], Math.Min(bounds[2], bounds[3])));
                local.Add(count / (double)n, draw.Truth[best], bounds);
            }

            partial[c] = local;
            progress?.Report(Interlocked.Add(ref done, Math.Min(chunk, options.Repetitions - c * chunk)));
        });

        return Summarize(options, partial, PerExampleMethods, _ => true, logK, selectionRow: PerExampleMethods.Length - 1);
    }

    /// <summary>One simulated search's losses, drawn into buffers reused from one repetition to the next.</summary>
    internal sealed class LossDraw(int n, int looks)
    {
        private readonly int _words = (n + 63) / 64;
        private readonly ulong[] _sharedExamples = new ulong[(n + 63) / 64];
        private readonly ulong[] _sharedMistakes = new ulong[(n + 63) / 64];

        /// <summary>Look j's losses are words [j·W, (j + 1)·W).</summary>
        public ulong[] Rows { get; } = new ulong[(long)looks * ((n + 63) / 64)];

        public int[] Errors { get; } = new int[looks];

        public double[] Truth { get; } = new double[looks];

        /// <summary>The selected look: the fewest errors, the earliest on ties.</summary>
        public int Best { get; private set; }

        public Span<ulong> Row(int j) => Rows.AsSpan(j * _words, _words);

        public void Search(SimulationOptions o, FastRandom random)
        {
            var rho = o.Correlation;
            var floor = o.TrueErrorLow;
            // The shared examples (a Bernoulli(ρ) process) and, among them, the shared mistakes (each with probability p_min).
            Array.Clear(_sharedExamples);
            Array.Clear(_sharedMistakes);
            if (rho > 0)
            {
                foreach (var i in Process(random, rho))
                {
                    Assign(_sharedExamples, i, true);
                    if (random.NextDouble() < floor) Assign(_sharedMistakes, i, true);
                }
            }

            Best = 0;
            for (var j = 0; j < looks; j++)
            {
                var p = o.TrueErrorLow + (o.TrueErrorHigh - o.TrueErrorLow) * random.NextDouble();
                Truth[j] = p;
                var row = Row(j);
                row.Clear();
                Bernoulli(random, rho > 0 ? OwnError(p, rho, floor) : p, row, set: true);
                if (rho > 0)
                {
                    for (var w = 0; w < _words; w++) row[w] = (row[w] & ~_sharedExamples[w]) | _sharedMistakes[w];
                }

                var errors = 0;
                foreach (var w in row) errors += BitOperations.PopCount(w);
                Errors[j] = errors;
                if (errors < Errors[Best]) Best = j;
            }
        }

        /// <summary>The chained-binomial upper bound on the selected look's true error, with the majority of every look as anchor.</summary>
        public double Chained(double delta)
        {
            var anchors = new MajorityAnchors(n);
            for (var j = 0; j < looks; j++) anchors.Add(Row(j), group: null);
            var vectors = anchors.Anchors();
            var (a, d) = anchors.Against(vectors, Row(Best));
            return ChainedBinomial.Bound(n, looks, a, d, delta).Interval.Upper;
        }

        /// <summary>The positions of a Bernoulli(p) process over the n examples, by geometric skips (exact).</summary>
        private IEnumerable<int> Process(FastRandom random, double p)
        {
            if (p <= 0) yield break;
            if (p >= 1)
            {
                for (var i = 0; i < n; i++) yield return i;
                yield break;
            }

            var logSkip = Math.Log(1 - p);
            var i2 = -1L;
            while (true)
            {
                // The gap to the next success is geometric: ⌊ln U / ln(1 − p)⌋ failures, U uniform on (0, 1].
                var u = 1.0 - random.NextDouble();
                i2 += 1 + (long)Math.Floor(Math.Log(u) / logSkip);
                if (i2 >= n) yield break;
                yield return (int)i2;
            }
        }

        private void Bernoulli(FastRandom random, double p, Span<ulong> bits, bool set)
        {
            foreach (var i in Process(random, p)) Assign(bits, i, set);
        }

        private static void Assign(Span<ulong> bits, int i, bool value)
        {
            if (value) bits[i >> 6] |= 1UL << (i & 63);
            else bits[i >> 6] &= ~(1UL << (i & 63));
        }
    }
}
