using System.Numerics;
using Accountant.Bounds;
using Accountant.Guards;

namespace Accountant.Simulation;

/// <summary>How the simulated analyst chooses configurations.</summary>
public enum AnalystStrategy
{
    /// <summary>Every configuration fixed in advance (non-adaptive).</summary>
    Fixed,
    /// <summary>A fifth of the looks at random points of a one-dimensional grid, then each next look at an unscored neighbour of the configuration with the best released value.</summary>
    Refine,
    /// <summary>
    /// The classic attack on a reused holdout (Dwork et al. 2015, Science 349:636; Blum &amp; Hardt 2015): K − 1 random
    /// classifiers, then their majority vote over those whose released value looked better than chance. Every configuration's
    /// true error is 0.5; simulated example by example.
    /// </summary>
    Attack,
}

/// <summary>A Monte Carlo of searches with known truth.</summary>
public sealed record SimulationOptions
{
    public int HoldoutSize { get; init; } = 1000;
    public int Looks { get; init; } = 100;

    /// <summary>The configurations' true errors: one value when Low = High, else a spread (uniform for fixed; a bowl for refine).</summary>
    public double TrueErrorLow { get; init; } = 0.2;
    public double TrueErrorHigh { get; init; } = 0.2;

    /// <summary>The share of examples on which every configuration makes the same (shared) mistake or not, in [0, 0.99].</summary>
    public double Correlation { get; init; }

    public AnalystStrategy Strategy { get; init; } = AnalystStrategy.Fixed;
    public GuardSpec Guard { get; init; } = GuardSpec.Exact;
    public double Confidence { get; init; } = 0.95;
    public int Repetitions { get; init; } = 1000;
    public int Seed { get; init; } = 1;

    /// <summary>
    /// Simulate every example's loss, not only each look's error count, so that methods that read per-example losses
    /// (chained-binomial) can be computed. For the fixed strategy only; slower (the losses of every look are drawn).
    /// </summary>
    public bool PerExample { get; init; }

    public void Validate()
    {
        if (HoldoutSize < 10 || HoldoutSize > 10_000_000) throw AccountantException.BadArguments("--holdout-size must be between 10 and 10,000,000.");
        if (Looks < 2 || Looks > 1_000_000) throw AccountantException.BadArguments("--looks must be between 2 and 1,000,000 for a simulation.");
        if (!(TrueErrorLow >= 0 && TrueErrorHigh <= 1 && TrueErrorLow <= TrueErrorHigh)) throw AccountantException.BadArguments("--true-error must be a rate in [0, 1], or LO:HI with LO ≤ HI, such as 0.1:0.3.");
        if (!(Correlation >= 0 && Correlation <= 0.99)) throw AccountantException.BadArguments("--correlation must lie in [0, 0.99].");
        if (!(Confidence > 0 && Confidence < 1)) throw AccountantException.BadArguments("--confidence must lie strictly between 0 and 1, such as 0.95.");
        if (Repetitions < 1 || Repetitions > 10_000_000) throw AccountantException.BadArguments("--repetitions must be between 1 and 10,000,000.");
        if (Strategy == AnalystStrategy.Attack && (long)HoldoutSize * Looks > 200_000_000) throw AccountantException.BadArguments("the attack is simulated example by example; keep --holdout-size × --looks within 200,000,000.");
        if (PerExample && Strategy != AnalystStrategy.Fixed) throw AccountantException.BadArguments("--per-example simulates non-adaptive searches only; use it with --strategy fixed.");
        if (PerExample && (long)HoldoutSize * Looks > 1_000_000_000) throw AccountantException.BadArguments("--per-example draws every look's losses; keep --holdout-size × --looks within 1,000,000,000.");
    }
}

/// <summary>One method's record over the repetitions.</summary>
/// <param name="Coverage">The fraction of repetitions where the bound was at least the selected configuration's true error.</param>
/// <param name="CoverageStdErr">Its binomial standard error, sqrt(c(1 − c)/R).</param>
/// <param name="MeanMargin">The mean of bound − observed best.</param>
/// <param name="ValidHere">False for the plain union bounds when the analyst was adaptive: they are shown to see them fail.</param>
public sealed record MethodCoverage(string Method, double Coverage, double CoverageStdErr, double MeanMargin, bool ValidHere)
{
    /// <summary>The mean margin over the oracle margin (<see cref="SimulationResult.OracleMargin"/>): 1 is as tight as the
    /// truth allows at this confidence; NaN when the oracle margin is not positive.</summary>
    public double MarginToOracle { get; init; } = double.NaN;

    /// <summary>True for the row that takes, in each search, the smallest of the guarantees listed: not a method of its own
    /// but what a reader of the statement's tightest line gets, shown to measure what choosing after seeing costs.</summary>
    public bool Selection { get; init; }
}

/// <summary>What the simulation measured.</summary>
/// <param name="MeanObserved">The mean over repetitions of the selected look's validation error (the raw best).</param>
/// <param name="MeanTrue">The mean true error of the selected configuration.</param>
/// <param name="RawCoverage">How often the raw best was at least the true error.</param>
/// <param name="LogEffectiveLooks">ln M_eff the adaptive accounting used.</param>
/// <param name="OracleMargin">The oracle margin: the confidence-level quantile (e.g. the 95th percentile) of true minus observed
/// error of the selected configuration over the repetitions, the smallest margin any bound could have and still cover that
/// often in this scenario (a bound that knew the scenario).</param>
public sealed record SimulationResult(SimulationOptions Options, double MeanObserved, double MeanTrue, double RawCoverage, double RawCoverageStdErr,
    double LogEffectiveLooks, IReadOnlyList<MethodCoverage> Methods, double OracleMargin = double.NaN)
{
    public double Optimism => MeanTrue - MeanObserved;
}

/// <summary>
/// Simulates searches on a holdout of n i.i.d. examples where every configuration's true error is known, selects the
/// best look as the accountant does (the lowest validation error), and records how often each method's bound covers the
/// selected configuration's true error.
/// <para>
/// Correlation ρ: each example is shared with probability ρ, the same examples for every configuration; a shared example is
/// a mistake of every configuration with probability p_min (the same mistake for all) and of none otherwise; on the other
/// examples each configuration errs on its own with probability q, chosen so that its true error is ρ·p_min + (1 − ρ)·q = p.
/// So ρ is the share of examples on which all configurations err alike, and two configurations of equal true error have
/// errors correlated by about ρ. Error counts are then exact binomial draws (the shared examples and shared mistakes once
/// per search, each configuration's own mistakes once per look), O(1) each; the attack, and searches run with
/// <see cref="SimulationOptions.PerExample"/>, are simulated example by example, with bitsets.
/// </para>
/// </summary>
public static partial class SearchSimulator
{
    public static readonly string[] Methods = [AdaptiveMethod, BinomialUnion.Name, KlUnion.Name, HoeffdingUnion.Name];

    private const string AdaptiveMethod = "adaptive-transcript";

    public static SimulationResult Run(SimulationOptions options, IProgress<int>? progress = null, CancellationToken cancel = default)
    {
        options.Validate();
        if (options.PerExample) return RunPerExample(options, progress, cancel);
        var n = options.HoldoutSize;
        var k = options.Looks;
        var delta = 1 - options.Confidence;
        var space = ValueSpace.ZeroOne(n);
        var pattern = Pattern(options);
        var logEffective = AdaptiveAccounting.LogEffectiveLooks(pattern, space);
        var adaptiveAnalyst = options.Strategy != AnalystStrategy.Fixed;
        var logK = Math.Log(k);

        // Bounds depend on the selected error count only: compute each once per count, lazily.
        var caches = new[]
        {
            new BoundCache(n, c => BinomialUnion.BoundLog(c, n, logEffective, delta).Upper),
            new BoundCache(n, c => BinomialUnion.BoundLog(c, n, logK, delta).Upper),
            new BoundCache(n, c => KlUnion.Bound(c / (double)n, n, logK, delta).Upper),
            new BoundCache(n, c => Math.Min(1, c / (double)n + HoeffdingUnion.MarginLog(n, logK, delta))),
        };

        // Repetitions run in fixed chunks, each summed in order and the chunks added in order, so the result is the same
        // to the last bit however the chunks are spread over threads.
        const int chunk = 256;
        var chunks = (options.Repetitions + chunk - 1) / chunk;
        var partial = new Totals[chunks];
        var done = 0;
        Parallel.For(0, chunks, new ParallelOptions { CancellationToken = cancel, MaxDegreeOfParallelism = Environment.ProcessorCount }, c =>
        {
            var local = new Totals(caches.Length);
            var bounds = new double[caches.Length];
            for (var r = c * chunk; r < Math.Min(options.Repetitions, (c + 1) * chunk); r++)
            {
                var random = FastRandom.For(options.Seed, r);
                var (count, truth) = options.Strategy switch
                {
                    AnalystStrategy.Attack => Attack(options, random, space),
                    AnalystStrategy.Refine => Refine(options, random, space),
                    _ => Fixed(options, random, space),
                };
                for (var i = 0; i < caches.Length; i++) bounds[i] = caches[i][count];
                local.Add(count / (double)n, truth, bounds);
            }

            partial[c] = local;
            progress?.Report(Interlocked.Add(ref done, Math.Min(chunk, options.Repetitions - c * chunk)));
        });

        return Summarize(options, partial, Methods, i => i == 0 || !adaptiveAnalyst, logEffective);
    }

    /// <summary>Adds up the chunks in order, and finds the oracle margin from every repetition's gap.</summary>
    private static SimulationResult Summarize(SimulationOptions options, Totals[] partial, IReadOnlyList<string> names, Func<int, bool> validHere,
        double logEffective, int selectionRow = -1)
    {
        var totals = new Totals(names.Count);
        foreach (var local in partial) totals.Merge(local);
        var reps = (double)options.Repetitions;
        double StdErr(double c) => Math.Sqrt(c * (1 - c) / reps);
        var oracle = Quantile(totals.Gaps, options.Confidence);
        var methods = names.Select((name, i) =>
        {
            var coverage = totals.Covered[i] / reps;
            var margin = totals.Margin[i] / reps;
            return new MethodCoverage(name, coverage, StdErr(coverage), margin, validHere(i))
            {
                MarginToOracle = oracle > 0 ? margin / oracle : double.NaN,
                Selection = i == selectionRow,
            };
        }).ToList();
        var raw = totals.RawCovered / reps;
        return new SimulationResult(options, totals.Observed / reps, totals.True / reps, raw, StdErr(raw), logEffective, methods, oracle);
    }

    /// <summary>The empirical q-quantile, the ⌈q·R⌉-th smallest of R values (the order statistic a bound covering q of the
    /// repetitions must reach).</summary>
    public static double Quantile(List<double> values, double q)
    {
        if (values.Count == 0) return double.NaN;
        var sorted = values.ToArray();
        Array.Sort(sorted);
        var index = Math.Clamp((int)Math.Ceiling(q * sorted.Length) - 1, 0, sorted.Length - 1);
        return sorted[index];
    }

    /// <summary>Which looks are adaptive, in order: the same in every repetition, so ln M_eff is computed once.</summary>
    public static List<AccountedLook> Pattern(SimulationOptions options)
    {
        var fixedLooks = options.Strategy switch
        {
            AnalystStrategy.Fixed => options.Looks,
            AnalystStrategy.Refine => RefineStart(options.Looks),
            _ => options.Looks - 1,
        };
        return Enumerable.Range(0, options.Looks).Select(i => new AccountedLook(i >= fixedLooks, options.Guard)).ToList();
    }

    private static int RefineStart(int looks) => Math.Max(2, looks / 5);

    private sealed class Totals(int methods)
    {
        public double Observed, True;
        public long RawCovered;
        public readonly long[] Covered = new long[methods];
        public readonly double[] Margin = new double[methods];

        /// <summary>Every repetition's true minus observed error of the selected configuration, in repetition order.</summary>
        public readonly List<double> Gaps = [];

        public void Add(double observed, double truth, double[] bounds)
        {
            Observed += observed;
            True += truth;
            Gaps.Add(truth - observed);
            if (observed >= truth) RawCovered++;
            for (var i = 0; i < bounds.Length; i++)
            {
                if (bounds[i] >= truth) Covered[i]++;
                Margin[i] += bounds[i] - observed;
            }
        }

        public void Merge(Totals other)
        {
            Observed += other.Observed;
            True += other.True;
            RawCovered += other.RawCovered;
            Gaps.AddRange(other.Gaps);
            for (var i = 0; i < Covered.Length; i++)
            {
                Covered[i] += other.Covered[i];
                Margin[i] += other.Margin[i];
            }
        }
    }

    private sealed class BoundCache(int n, Func<int, double> compute)
    {
        private readonly double[] _values = Enumerable.Repeat(double.NaN, n + 1).ToArray();

        public double this[int count]
        {
            get
            {
                var value = Volatile.Read(ref _values[count]);
                if (double.IsNaN(value))
                {
                    value = compute(count);
                    Volatile.Write(ref _values[count], value);
                }

                return value;
            }
        }
    }

    /// <summary>The shared part of the correlation model for one repetition: how many examples are shared, and how many of
    /// those are shared mistakes.</summary>
    private readonly record struct Shared(int Examples, int Mistakes, double Rho, double Floor);

    private static Shared DrawShared(SimulationOptions o, FastRandom random)
    {
        if (o.Correlation <= 0) return new Shared(0, 0, 0, o.TrueErrorLow);
        var examples = BinomialDraw.Sample(random, o.HoldoutSize, o.Correlation);
        return new Shared(examples, BinomialDraw.Sample(random, examples, o.TrueErrorLow), o.Correlation, o.TrueErrorLow);
    }

    /// <summary>Draws one configuration's error count with true error <paramref name="p"/>: the shared mistakes, and its own
    /// mistakes with probability q on the other examples, q = (p − ρ·p_min)/(1 − ρ), so that its true error is p.</summary>
    private static int Count(int n, double p, Shared shared, FastRandom random)
    {
        if (shared.Rho <= 0) return BinomialDraw.Sample(random, n, p);
        return shared.Mistakes + BinomialDraw.Sample(random, n - shared.Examples, OwnError(p, shared.Rho, shared.Floor));
    }

    /// <summary>A look's error rate on the examples it does not share: q = (p − ρ·p_min)/(1 − ρ).</summary>
    internal static double OwnError(double p, double rho, double floor) => Math.Clamp((p - rho * floor) / (1 - rho), 0.0, 1.0);

    private static (int Count, double Truth) Fixed(SimulationOptions o, FastRandom random, ValueSpace space)
    {
        var shared = DrawShared(o, random);
        var best = int.MaxValue;
        var truth = 0.0;
        for (var j = 0; j < o.Looks; j++)
        {
            var p = o.TrueErrorLow + (o.TrueErrorHigh - o.TrueErrorLow) * random.NextDouble();
            var count = Count(o.HoldoutSize, p, shared, random);
            if (count < best)
            {
                best = count;
                truth = p;
            }
        }

        return (best, truth);
    }

    private static (int Count, double Truth) Refine(SimulationOptions o, FastRandom random, ValueSpace space)
    {
        var n = o.HoldoutSize;
        var shared = DrawShared(o, random);
        var grid = 4 * o.Looks;
        var center = random.Next(grid);
        double TrueError(int x)
        {
            var d = 2.0 * Math.Abs(x - center) / grid;
            return o.TrueErrorLow + (o.TrueErrorHigh - o.TrueErrorLow) * Math.Min(1.0, d * d * 4);
        }

        var scored = new HashSet<int>();
        var guard = new GuardRunner(o.Guard, space, random);
        int best = int.MaxValue, bestReleasedAt = -1;
        double truth = 0, bestReleased = double.PositiveInfinity;
        var start = RefineStart(o.Looks);
        for (var j = 0; j < o.Looks; j++)
        {
            int x;
            if (j < start || bestReleasedAt < 0)
            {
                do x = random.Next(grid); while (!scored.Add(x));
            }
            else
            {
                x = -1;
                for (var attempt = 0; attempt < 12 && x < 0; attempt++)
                {
                    var candidate = Math.Clamp(bestReleasedAt + random.Next(-3, 4), 0, grid - 1);
                    if (scored.Add(candidate)) x = candidate;
                }

                if (x < 0)
                {
                    do x = random.Next(grid); while (!scored.Add(x));
                }
            }

            var p = TrueError(x);
            var count = Count(n, p, shared, random);
            var released = guard.Release(count / (double)n, BinomialDraw.Sample(random, n, p) / (double)n);
            // The analyst moves toward the best value it was told; ties go to the latest.
            if (released is { } value && value <= bestReleased)
            {
                bestReleased = value;
                bestReleasedAt = x;
            }

            if (count < best)
            {
                best = count;
                truth = p;
            }
        }

        return (best, truth);
    }

    private static (int Count, double Truth) Attack(SimulationOptions o, FastRandom random, ValueSpace space)
    {
        var n = o.HoldoutSize;
        var words = (n + 63) / 64;
        var lastMask = n % 64 == 0 ? ulong.MaxValue : (1UL << (n % 64)) - 1;
        var guard = new GuardRunner(o.Guard, space, random);
        var loss = new ulong[words];
        // Bit-sliced counters of how many kept classifiers err on each example.
        var counter = new Comparisons.BitCounter(words);
        var kept = 0;
        var best = int.MaxValue;
        var lastTold = double.PositiveInfinity;
        for (var j = 0; j < o.Looks - 1; j++)
        {
            var count = 0;
            for (var w = 0; w < words; w++)
            {
                loss[w] = random.NextUInt64() & (w == words - 1 ? lastMask : ulong.MaxValue);
                count += BitOperations.PopCount(loss[w]);
            }

            best = Math.Min(best, count);
            var released = guard.Release(count / (double)n, BinomialDraw.Sample(random, n, 0.5) / (double)n);
            // "Looked good": told a value better than chance; the Ladder repeats its last value, so there only a new best counts.
            var good = released is { } value && value < 0.5 && (o.Guard.Kind != GuardKind.Ladder || value < lastTold);
            if (released is { } told) lastTold = told;
            if (!good) continue;
            kept++;
            counter.Add(loss);
        }

        // The final, adaptive look: the majority vote of the kept classifiers errs where more than half of them err. An even
        // count gets one more vote from a fresh random classifier, which breaks ties the way a fixed tie rule would on
        // labels independent of the features (a coin flip), without looking at the labels.
        if (kept % 2 == 0)
        {
            counter.Add(RandomVector(random, words, lastMask));
            kept++;
        }

        var majority = counter.Majority(n);
        var final = majority.Sum(BitOperations.PopCount);
        guard.Release(final / (double)n, 0.5);
        return (Math.Min(best, final), 0.5);
    }

    private static ulong[] RandomVector(FastRandom random, int words, ulong lastMask)
    {
        var v = new ulong[words];
        for (var w = 0; w < words; w++) v[w] = random.NextUInt64() & (w == words - 1 ? lastMask : ulong.MaxValue);
        return v;
    }

    /// <summary>A guard's stream within one simulated search.</summary>
    private sealed class GuardRunner(GuardSpec spec, ValueSpace space, FastRandom random)
    {
        private GuardState _state = GuardState.Empty;
        private readonly SequentialGuardNoise _noise = new(random);

        public double? Release(double score, double trainScore)
        {
            var release = Guard.Apply(spec, _state, score, space, higherIsBetter: false, trainScore, _noise);
            _state = _state.After(release);
            return release.Value;
        }
    }
}
