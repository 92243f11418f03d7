using Accountant.Guards;
using Accountant.Ledger;

namespace Accountant.Statements;

/// <summary>What a statement needs beyond the looks: the values a release can take, the AUC's class counts, per-example losses.</summary>
/// <param name="Space">The value space of a released score (for release-sequence counting); defaults from the metric when null.</param>
/// <param name="Positives">For AUC holdouts: the number of positive examples.</param>
/// <param name="LossesOf">Reads one look's per-example losses, for methods that need them (empirical Bernstein).</param>
/// <param name="Openings">The openings of the holdout's sealed test set, oldest first.</param>
public sealed record StatementInputs(ValueSpace? Space = null, long? Positives = null, Func<Look, byte[]?>? LossesOf = null, IReadOnlyList<TestOpening>? Openings = null)
{
    public static StatementInputs None { get; } = new();

    /// <summary>The anchors of the correlation-aware guarantee, when it applies (<see cref="CorrelationAware"/>).</summary>
    public ChainedInputs? Chained { get; init; }

    /// <summary>Why the correlation-aware guarantee is not in the statement, when it could have been; null otherwise.</summary>
    public string? ChainedNote { get; init; }
}
