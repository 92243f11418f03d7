namespace Accountant.Comparisons;

/// <summary>One look that can be compared with the best: its number, its observed score and its 0/1 loss bitset (null when only the score is known).</summary>
public sealed record ComparableLook(int Number, double Score, byte[]? Losses);

/// <summary>The best look against one rival: McNemar's test and its Holm-adjusted p-value over all rivals.</summary>
public sealed record RivalTest(int Look, double Score, PairComparison Comparison, double HolmAdjusted);

/// <summary>
/// Is the winner really better? The best look against the runner-up (exact McNemar), and against every other look with
/// Holm's step-down over all of them; the looks whose adjusted p-value exceeds α cannot be told apart from the best.
/// </summary>
/// <param name="Best">The best look's number.</param>
/// <param name="Alpha">The family-wise error rate of the tie set (δ = 1 − confidence).</param>
/// <param name="RunnerUp">The best against the runner-up (A = best), or null when there is no rival with losses.</param>
/// <param name="Rivals">The best against every other selectable look with losses, in look order.</param>
/// <param name="TiedWithBest">The best look, then every rival Holm cannot separate from it, best score first.</param>
/// <param name="WithoutLosses">Selectable looks left out because they carry only a score.</param>
/// <param name="Unavailable">Why the test could not be run, or null.</param>
public sealed record WinnerTestResult(
    int Best,
    double Alpha,
    PairComparison? RunnerUp,
    IReadOnlyList<RivalTest> Rivals,
    IReadOnlyList<int> TiedWithBest,
    int WithoutLosses,
    string? Unavailable)
{
    /// <summary>True when McNemar's test cannot tell the runner-up from the best at level α (after Holm's adjustment).</summary>
    public bool RunnerUpTied => RunnerUp is { } r && TiedWithBest.Contains(r.LookB);

    /// <summary>The caution every winner test carries.</summary>
    public const string SelectionCaution =
        "Both the best look and the runner-up were selected on this holdout, so the p-values are optimistic: a difference that was searched for is more likely to look significant; confirm it on data not used for selection.";
}

public static class WinnerTest
{
    /// <summary>
    /// Runs the winner test. <paramref name="selectable"/> holds the looks that can be selected (not voided); the best is
    /// the one numbered <paramref name="best"/>. Lower scores are better unless <paramref name="higherIsBetter"/>.
    /// </summary>
    public static WinnerTestResult Run(int best, IReadOnlyList<ComparableLook> selectable, bool higherIsBetter, double alpha)
    {
        if (!(alpha > 0 && alpha < 1))
        {
            throw new ArgumentOutOfRangeException(nameof(alpha), "alpha must lie strictly between 0 and 1");
        }

        var winner = selectable.FirstOrDefault(l => l.Number == best)
            ?? throw new ArgumentException($"look {best} is not among the selectable looks", nameof(best));
        var withoutLosses = selectable.Count(l => l.Losses is null && l.Number != best);
        if (winner.Losses is null)
        {
            return new WinnerTestResult(best, alpha, null, [], [best], withoutLosses,
                $"the best look #{best} carries only a score, so it cannot be compared example by example; record its predictions to enable the winner test.");
        }

        var rivals = selectable.Where(l => l.Number != best && l.Losses is not null).OrderBy(l => l.Number).ToList();
        if (rivals.Count == 0)
        {
            return new WinnerTestResult(best, alpha, null, [], [best], withoutLosses,
                "no other selectable look carries per-example losses, so there is nothing to compare the best look with.");
        }

        var comparisons = rivals.Select(r => McNemar.Compare(best, r.Number, winner.Losses, r.Losses)).ToList();
        var adjusted = Holm.Adjust(comparisons.Select(c => c.PValue).ToList());
        var tests = rivals.Select((r, i) => new RivalTest(r.Number, r.Score, comparisons[i], adjusted[i])).ToList();
        var runnerUp = tests.OrderBy(t => higherIsBetter ? -t.Score : t.Score).ThenBy(t => t.Look).First();
        var tied = tests.Where(t => t.HolmAdjusted > alpha)
            .OrderBy(t => higherIsBetter ? -t.Score : t.Score).ThenBy(t => t.Look)
            .Select(t => t.Look).Prepend(best).ToList();
        return new WinnerTestResult(best, alpha, runnerUp.Comparison, tests, tied, withoutLosses, null);
    }
}
