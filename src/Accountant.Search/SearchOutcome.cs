using Accountant.Ledger;
using Accountant.Search.Trainers;

namespace Accountant.Search;

/// <summary>One configuration trained and scored: the look the ledger recorded.</summary>
public sealed record ScoredConfiguration(Look Look, TrainerConfiguration Configuration, double Seconds);

/// <summary>
/// What a search process did: the looks it recorded (in a shared search, this worker's own) and the best of them.
/// <see cref="Cancelled"/> is set when it stopped early; every finished look is in the ledger.
/// </summary>
public sealed record SearchOutcome(IReadOnlyList<ScoredConfiguration> Looks, ScoredConfiguration? Best, bool Cancelled);
