using System.Globalization;
using Accountant.Bounds;
using Accountant.Comparisons;
using Accountant.Estimates;
using Accountant.Ledger;

namespace Accountant.Statements;

/// <summary>
/// One bootstrap estimate of the selected configuration's true score, on the metric's own scale. An estimate, never a
/// guarantee: it rests on the bootstrap's approximation of the sampling distribution.
/// </summary>
/// <param name="Method"><c>bootstrap-bias</c> or <c>max-bootstrap</c>.</param>
/// <param name="Estimate">The bias-corrected score (bootstrap-bias); null for max-bootstrap, which gives only a bound.</param>
/// <param name="Bound">The conservative side: the percentile end (bootstrap-bias) or the simultaneous bound (max-bootstrap).</param>
/// <param name="Margin">|Bound − observed best|.</param>
/// <param name="Lower">The interval's lower end on the metric's scale.</param>
/// <param name="Upper">The interval's upper end on the metric's scale.</param>
/// <param name="Looks">Looks whose per-example losses entered the bootstrap.</param>
/// <param name="Resamples">B.</param>
/// <param name="Seed">The seed that reproduces it.</param>
/// <param name="Asymptotic">True when its coverage holds only as n grows (max-bootstrap).</param>
/// <param name="CriticalValue">max-bootstrap: the critical value in standard errors; null otherwise.</param>
/// <param name="Reference">Where the method is published.</param>
public sealed record EstimateLine(string Method, double? Estimate, double Bound, double Margin, double Lower, double Upper,
    int Looks, int Resamples, ulong Seed, bool Asymptotic, double? CriticalValue, string Reference);

/// <summary>
/// The statement's methods that need per-example losses: the bootstrap estimates and the winner test. They are added
/// only when asked for, because they read every look's loss blob; the rest of a statement reads scores only.
/// </summary>
public static class PerExampleMethods
{
    public const string BootstrapBias = "bootstrap-bias";
    public const string MaxBootstrap = "max-bootstrap";
    public const string BootstrapBiasReference = "Tsamardinos, Greasidou & Borboudakis 2018, Mach. Learn. 107:1895 (BBC), applied to holdout predictions; percentile interval";
    public const string MaxBootstrapReference = "Westfall & Young 1993, Resampling-Based Multiple Testing; Romano & Wolf 2005, Econometrica 73:1237 (single-step, studentized)";
    public const string WinnerReference = "McNemar 1947, Psychometrika 12:153 (exact binomial form); Holm 1979, Scand. J. Stat. 6:65";

    /// <summary>The most resamples a statement accepts.</summary>
    public const int MaxResamples = 1_000_000;

    /// <summary>The fewest: a 95% percentile from fewer than 20 resamples is the largest value drawn.</summary>
    public const int MinResamples = 20;

    /// <summary>Checks the options before anything is read.</summary>
    public static void Check(Holdout holdout, StatementOptions options)
    {
        if (!options.Estimates && !options.Winner) return;
        if (!holdout.Metric.IsZeroOne())
        {
            throw AccountantException.BadArguments($"--estimates and --winner need 0/1 losses (metric error or accuracy), but holdout '{holdout.Name}' uses {holdout.Metric.Name()}; leave them out for this holdout.");
        }

        if (options.Resamples is < MinResamples or > MaxResamples)
        {
            throw AccountantException.BadArguments($"--resamples must be a count from {MinResamples} to {MaxResamples:#,0} (got {options.Resamples.ToString(CultureInfo.InvariantCulture)}); the default is {BootstrapSettings.DefaultResamples:#,0}.");
        }
    }

    /// <summary>Adds what <paramref name="statement"/>'s options ask for, reading the looks' losses from <paramref name="store"/>.</summary>
    public static Statement Add(Statement statement, ILedgerStore store, IReadOnlyList<Look> looks, IReadOnlyList<LookVoid> voids)
    {
        var options = statement.Options;
        var holdout = statement.Holdout;
        Check(holdout, options);
        if ((!options.Estimates && !options.Winner) || statement.Best is not { } best)
        {
            return statement;
        }

        var voided = voids.Select(v => v.LookNumber).ToHashSet();
        var withLosses = looks.Where(l => l.LossEncoding == LossEncoding.Bitset).ToList();
        var bits = new Dictionary<int, byte[]>(withLosses.Count);
        foreach (var look in withLosses)
        {
            bits[look.Number] = store.LossBytes(holdout, look.Number) ?? throw new AccountantException(ErrorKind.Integrity,
                $"look {look.Number} on holdout '{holdout.Name}' should carry per-example losses but has none in the ledger; run 'accountant verify'.");
        }

        var result = statement;
        if (options.Winner)
        {
            var selectable = looks.Where(l => !voided.Contains(l.Number))
                .Select(l => new ComparableLook(l.Number, l.Score, bits.GetValueOrDefault(l.Number))).ToList();
            var winner = WinnerTest.Run(best.Number, selectable, holdout.Metric.HigherIsBetter(), options.Delta);
            result = result with { Winner = winner };
            if (winner.RunnerUpTied)
            {
                var r = winner.RunnerUp!;
                var adjusted = winner.Rivals.Single(x => x.Look == r.LookB).HolmAdjusted;
                result = result with
                {
                    Warnings = [.. result.Warnings, new StatementWarning("winner-tie",
                        $"the runner-up #{r.LookB} cannot be told apart from the best #{best.Number}: they disagree on {r.Discordant} example(s) ({r.OnlyA} only the best gets wrong, {r.OnlyB} only the runner-up), exact McNemar p = {P(r.PValue)} (Holm-adjusted {P(adjusted)}), and {winner.TiedWithBest.Count} look(s) are tied with the best at alpha = {P(winner.Alpha)}; both were selected on this holdout, so choose between them on other grounds or on fresh data.")],
                };
            }
        }

        if (options.Estimates)
        {
            result = bits.ContainsKey(best.Number)
                ? result with { Estimates = Estimates(statement, withLosses, bits, voided, best) }
                : result with { EstimatesNote = $"the best look #{best.Number} carries only a score, so the bootstrap cannot resample it; record its predictions to get the estimates." };
            if (result.Estimates.Count > 0 && withLosses.Count < looks.Count)
            {
                result = result with { EstimatesNote = $"{looks.Count - withLosses.Count} of {looks.Count} looks carry only a score and are left out of the bootstrap; max-bootstrap is simultaneous over the {withLosses.Count} looks with losses only." };
            }
        }

        return result;
    }

    private static List<EstimateLine> Estimates(Statement statement, List<Look> withLosses, Dictionary<int, byte[]> bits, HashSet<int> voided, Look best)
    {
        var holdout = statement.Holdout;
        var options = statement.Options;
        var matrix = LossMatrix.FromBitsets(holdout.Size, withLosses.Select(l => bits[l.Number]).ToList());
        var selectable = withLosses.Select(l => !voided.Contains(l.Number)).ToArray();
        var row = withLosses.FindIndex(l => l.Number == best.Number);
        var settings = new BootstrapSettings { Resamples = options.Resamples, Seed = options.Seed, Confidence = options.Confidence, Sided = options.Sided };
        var result = BootstrapEstimates.Run(matrix, selectable, row, settings);
        var accuracy = holdout.Metric == Metric.Accuracy;
        var observed = best.Score;
        var lines = new List<EstimateLine>();

        var bbc = result.BiasCorrection;
        var (bbcLower, bbcUpper) = OnMetric(bbc.Lower, bbc.Upper, accuracy);
        var bbcBound = accuracy ? bbcLower : bbcUpper;
        lines.Add(new EstimateLine(BootstrapBias, accuracy ? 1 - bbc.Estimate : bbc.Estimate, bbcBound, Math.Abs(bbcBound - observed), bbcLower, bbcUpper,
            matrix.Rows, result.Resamples, result.Seed, Asymptotic: false, CriticalValue: null, BootstrapBiasReference));

        var max = result.MaxBootstrap;
        var (maxLower, maxUpper) = OnMetric(max.Lower, max.Upper, accuracy);
        var maxBound = accuracy ? maxLower : maxUpper;
        lines.Add(new EstimateLine(MaxBootstrap, null, maxBound, Math.Abs(maxBound - observed), maxLower, maxUpper,
            matrix.Rows, result.Resamples, result.Seed, Asymptotic: true, max.CriticalValue, MaxBootstrapReference));
        return lines;
    }

    /// <summary>An interval on the error turned into one on the metric: [l, u] on the error is [1 − u, 1 − l] on accuracy.</summary>
    private static (double Lower, double Upper) OnMetric(double lower, double upper, bool accuracy)
    {
        return accuracy ? (1 - upper, 1 - lower) : (lower, upper);
    }

    private static string P(double p) => p.ToString(p < 0.0001 ? "0.0e+0" : "0.####", CultureInfo.InvariantCulture);
}
