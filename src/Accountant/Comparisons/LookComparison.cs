using System.Globalization;
using Accountant.Ledger;
using Accountant.Statements;

namespace Accountant.Comparisons;

/// <summary>McNemar's test of two named looks of one holdout, with what is needed to report it.</summary>
/// <param name="Holdout">The holdout both looks were scored on.</param>
/// <param name="A">The first look.</param>
/// <param name="B">The second look.</param>
/// <param name="Test">The test (A first).</param>
/// <param name="Best">The holdout's best look, or null when every look is voided.</param>
public sealed record LookComparison(Holdout Holdout, Look A, Look B, PairComparison Test, Look? Best)
{
    /// <summary>True when either look is the best or the runner-up chosen by score on this very holdout.</summary>
    public bool SelectedOnThisHoldout { get; init; }
}

public static class LookComparisons
{
    public const string Best = "best";
    public const string RunnerUp = "runner-up";

    /// <summary>
    /// Compares two looks of a holdout, each named by its number, <c>best</c> or <c>runner-up</c> (the best and second-best
    /// non-voided looks by score). Both need 0/1 per-example losses.
    /// </summary>
    public static LookComparison Compare(this Bookkeeper book, string holdoutName, string lookA, string lookB)
    {
        var holdout = book.Holdout(holdoutName);
        if (!holdout.Metric.IsZeroOne())
        {
            throw AccountantException.BadArguments($"compare needs 0/1 losses (metric error or accuracy), but holdout '{holdout.Name}' uses {holdout.Metric.Name()}.");
        }

        var looks = book.Store.Looks(holdout);
        var voided = book.Store.Voids(holdout).Select(v => v.LookNumber).ToHashSet();
        var best = StatementBuilder.SelectBest(holdout.Metric, looks, voided);
        var runnerUp = best is null ? null : StatementBuilder.SelectBest(holdout.Metric, looks, voided.Append(best.Number).ToHashSet());
        Look Resolve(string name)
        {
            var text = name.Trim();
            if (string.Equals(text, Best, StringComparison.OrdinalIgnoreCase))
            {
                return best ?? throw AccountantException.BadArguments($"holdout '{holdout.Name}' has no selectable look, so there is no 'best'; give look numbers instead.");
            }

            if (string.Equals(text, RunnerUp, StringComparison.OrdinalIgnoreCase))
            {
                return runnerUp ?? throw AccountantException.BadArguments($"holdout '{holdout.Name}' has fewer than two selectable looks, so there is no 'runner-up'; give look numbers instead.");
            }

            if (!int.TryParse(text, NumberStyles.None, CultureInfo.InvariantCulture, out var number))
            {
                throw AccountantException.BadArguments($"'{Losses.Shorten(name)}' is not a look; give a look number, '{Best}' or '{RunnerUp}'.");
            }

            var look = number >= 1 && number <= looks.Count ? looks[number - 1] : null;
            if (look is null || look.Number != number) look = looks.FirstOrDefault(l => l.Number == number);
            return look ?? throw AccountantException.BadArguments($"holdout '{holdout.Name}' has no look {number}; it has {looks.Count} look(s), numbered from 1.");
        }

        var a = Resolve(lookA);
        var b = Resolve(lookB);
        if (a.Number == b.Number)
        {
            throw AccountantException.BadArguments($"both names refer to look {a.Number}; compare two different looks.");
        }

        byte[] LossesOf(Look look) => look.LossEncoding == LossEncoding.Bitset && book.Store.LossBytes(holdout, look.Number) is { } bits
            ? bits
            : throw AccountantException.BadArguments($"look {look.Number} carries only a score, so it cannot be compared example by example; record its predictions to compare it.");

        var test = McNemar.Compare(a.Number, b.Number, LossesOf(a), LossesOf(b));
        var selected = new[] { best?.Number, runnerUp?.Number };
        return new LookComparison(holdout, a, b, test, best) { SelectedOnThisHoldout = selected.Contains(a.Number) || selected.Contains(b.Number) };
    }
}
