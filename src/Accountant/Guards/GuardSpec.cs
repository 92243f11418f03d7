using System.Globalization;

namespace Accountant.Guards;

public enum GuardKind
{
    /// <summary>The score itself.</summary>
    Exact,
    /// <summary>The score rounded to D decimals.</summary>
    Rounded,
    /// <summary>The Ladder (Blum &amp; Hardt 2015, Alg. 1).</summary>
    Ladder,
    /// <summary>Thresholdout (Dwork et al. 2015, arXiv 1506.02629, Fig. 1).</summary>
    Thresholdout,
}

/// <summary>
/// A guard: the rule that turns a holdout score into the value an adaptive search is told. Written
/// <c>exact</c>, <c>rounded:D</c>, <c>ladder:STEP</c> or <c>thresholdout:T,SIGMA,BUDGET</c>.
/// </summary>
public sealed record GuardSpec
{
    private GuardSpec(GuardKind kind) => Kind = kind;

    public GuardKind Kind { get; }

    /// <summary>rounded: decimals kept.</summary>
    public int Decimals { get; private init; }

    /// <summary>ladder: the step η (in the metric's units).</summary>
    public double Step { get; private init; }

    /// <summary>thresholdout: the threshold T.</summary>
    public double Threshold { get; private init; }

    /// <summary>thresholdout: the Laplace scale σ.</summary>
    public double Sigma { get; private init; }

    /// <summary>thresholdout: how many holdout answers may be given before it refuses.</summary>
    public int Budget { get; private init; }

    public static GuardSpec Exact { get; } = new(GuardKind.Exact);

    public static GuardSpec Rounded(int decimals) => decimals is >= 0 and <= 8
        ? new(GuardKind.Rounded) { Decimals = decimals }
        : throw AccountantException.BadArguments($"rounded:{decimals} keeps between 0 and 8 decimals; use, for example, rounded:2.");

    public static GuardSpec Ladder(double step) => step > 0 && step < 1 && double.IsFinite(step)
        ? new(GuardKind.Ladder) { Step = step }
        : throw AccountantException.BadArguments($"ladder:{Text(step)} needs a step strictly between 0 and 1; use, for example, ladder:0.01.");

    public static GuardSpec Thresholdout(double threshold, double sigma, int budget) =>
        threshold > 0 && sigma >= 0 && budget >= 0 && double.IsFinite(threshold) && double.IsFinite(sigma)
            ? new(GuardKind.Thresholdout) { Threshold = threshold, Sigma = sigma, Budget = budget }
            : throw AccountantException.BadArguments("thresholdout:T,SIGMA,BUDGET needs T > 0, SIGMA ≥ 0 and a whole BUDGET ≥ 0; use, for example, thresholdout:0.04,0.01,50.");

    public static GuardSpec Parse(string text)
    {
        var trimmed = text.Trim().ToLowerInvariant();
        var colon = trimmed.IndexOf(':');
        var name = colon < 0 ? trimmed : trimmed[..colon];
        var arguments = colon < 0 ? [] : trimmed[(colon + 1)..].Split(',');
        var fail = AccountantException.BadArguments($"unknown guard '{text}'; use exact, rounded:D, ladder:STEP or thresholdout:T,SIGMA,BUDGET (for example ladder:0.01).");
        switch (name)
        {
            case "exact" when arguments.Length == 0:
                return Exact;
            case "rounded" when arguments.Length == 1 && int.TryParse(arguments[0], NumberStyles.Integer, CultureInfo.InvariantCulture, out var decimals):
                return Rounded(decimals);
            case "ladder" when arguments.Length == 1 && TryNumber(arguments[0], out var step):
                return Ladder(step);
            case "thresholdout" when arguments.Length == 3 && TryNumber(arguments[0], out var t) && TryNumber(arguments[1], out var sigma)
                                     && int.TryParse(arguments[2], NumberStyles.Integer, CultureInfo.InvariantCulture, out var budget):
                return Thresholdout(t, sigma, budget);
            default:
                throw fail;
        }
    }

    private static bool TryNumber(string text, out double value) =>
        double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out value);

    private static string Text(double value) => value.ToString("R", CultureInfo.InvariantCulture);

    /// <summary>The canonical spelling, which names the guard's stream in the ledger.</summary>
    public override string ToString() => Kind switch
    {
        GuardKind.Exact => "exact",
        GuardKind.Rounded => $"rounded:{Decimals.ToString(CultureInfo.InvariantCulture)}",
        GuardKind.Ladder => $"ladder:{Text(Step)}",
        _ => $"thresholdout:{Text(Threshold)},{Text(Sigma)},{Budget.ToString(CultureInfo.InvariantCulture)}",
    };
}
