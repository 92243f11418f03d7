using Accountant.Bounds;
using Accountant.Ledger;

namespace Accountant.Statements;

/// <summary>Options for a statement. Confidence is 1 − δ.</summary>
public sealed record StatementOptions
{
    public double Confidence { get; init; } = 0.95;

    /// <summary>The margin the budget is measured against.</summary>
    public double Tolerance { get; init; } = 0.02;

    public Sidedness Sided { get; init; } = Sidedness.OneSided;

    public double Delta => 1.0 - Confidence;

    /// <summary>Add the bootstrap estimates (bootstrap-bias, max-bootstrap); they read every look's per-example losses.</summary>
    public bool Estimates { get; init; }

    /// <summary>Add the winner test (McNemar best against runner-up, Holm tie set); it reads every look's per-example losses.</summary>
    public bool Winner { get; init; }

    /// <summary>Bootstrap resamples B for the estimates.</summary>
    public int Resamples { get; init; } = Accountant.Estimates.BootstrapSettings.DefaultResamples;

    /// <summary>The bootstrap's seed: the same seed reproduces the same estimates.</summary>
    public ulong Seed { get; init; } = Accountant.Estimates.BootstrapSettings.DefaultSeed;
}

/// <summary>One method's corrected bound on the selected look's true score.</summary>
/// <param name="Method">The method's name, e.g. <c>binomial-union</c>.</param>
/// <param name="Bound">The conservative side: an upper bound on an error, a lower bound on an accuracy.</param>
/// <param name="Margin">|Bound − observed|.</param>
/// <param name="Guarantee">True when the bound holds for any distribution (given i.i.d. examples and the stated adaptivity).</param>
/// <param name="Lower">The interval's lower end on the metric's own scale (two-sided statements; else the range's end).</param>
/// <param name="Upper">The interval's upper end on the metric's own scale.</param>
/// <param name="Reference">Where the method is published.</param>
/// <param name="Tightest">True on the guarantee with the smallest margin.</param>
public sealed record BoundLine(string Method, double Bound, double Margin, bool Guarantee, double Lower, double Upper, string Reference, bool Tightest = false);

/// <summary>Looks used and left at a tolerance: the most looks whose margin stays within it.</summary>
public sealed record Budget(double Tolerance, string Method, long MaxLooks, long LooksUsed)
{
    public long LooksLeft => Math.Max(0, MaxLooks - LooksUsed);

    public bool Overused => LooksUsed > MaxLooks;
}

/// <summary>What a statement needs to know about a holdout's looks: how many, of which kinds, and the best one.</summary>
/// <param name="Looks">Every look (M), voided ones too.</param>
/// <param name="Adaptive">Looks marked adaptive.</param>
/// <param name="ScoreOnly">Looks without per-example losses.</param>
/// <param name="Best">The best non-voided look (the earliest on ties), or null.</param>
/// <param name="Pattern">Every look's adaptive flag and guard, in order: needed (and read) only when some look is adaptive.</param>
public sealed record LookTally(int Looks, int Adaptive, int ScoreOnly, Look? Best, IReadOnlyList<Guards.AccountedLook>? Pattern = null);

/// <summary>A warning with a stable code that scripts can match.</summary>
public sealed record StatementWarning(string Code, string Message);

/// <summary>The accountant's report on one holdout.</summary>
public sealed record Statement(
    Holdout Holdout,
    StatementOptions Options,
    int Looks,
    int AdaptiveLooks,
    int VoidedLooks,
    int ScoreOnlyLooks,
    double LogEffectiveLooks,
    bool UnguardedAdaptivity,
    Look? Best,
    IReadOnlyList<BoundLine> Bounds,
    Budget Budget,
    string? ChainHead,
    IReadOnlyList<StatementWarning> Warnings,
    IReadOnlyList<string> Cautions,
    IReadOnlyList<TestOpening>? Openings = null)
{
    /// <summary>How many times the sealed test set was opened.</summary>
    public int TestOpenings => Openings?.Count ?? 0;

    /// <summary>The bootstrap estimates, when asked for (<see cref="StatementOptions.Estimates"/>): never guarantees.</summary>
    public IReadOnlyList<EstimateLine> Estimates { get; init; } = [];

    /// <summary>Why estimates that were asked for could not be computed, or what they left out; null otherwise.</summary>
    public string? EstimatesNote { get; init; }

    /// <summary>The winner test, when asked for (<see cref="StatementOptions.Winner"/>).</summary>
    public Accountant.Comparisons.WinnerTestResult? Winner { get; init; }

    /// <summary>The tightest guarantee's line (bounds are listed tightest first).</summary>
    public BoundLine? Primary => Bounds.Count > 0 ? Bounds[0] : null;

    /// <summary>The effective number of looks the bounds are corrected for, e^(ln M_eff); equals <see cref="Looks"/> without adaptive looks.</summary>
    public double EffectiveLooks => Math.Exp(LogEffectiveLooks);

    /// <summary>What the tightest guarantee's margin is made of: what sampling alone costs, and what the comparisons add.</summary>
    public MarginSplit? Split { get; init; }

    /// <summary>
    /// When the tightest guarantee is the correlation-aware one: the number of looks at which the plain union bound would give
    /// the same bound (fewer than <see cref="Looks"/> when the looks' mistakes are correlated); null otherwise.
    /// </summary>
    public double? EffectiveComparisons { get; init; }

    /// <summary>The anchors of the correlation-aware guarantee, when it was computed.</summary>
    public IReadOnlyList<ChainedAnchor> Anchors { get; init; } = [];

    /// <summary>The anchor that gave the correlation-aware guarantee's bound, when it was computed.</summary>
    public ChainedAnchor? AnchorUsed { get; init; }

    /// <summary>Why the correlation-aware guarantee is not in the statement although the metric allows it; null otherwise.</summary>
    public string? CorrelationNote { get; init; }
}

/// <summary>
/// The tightest guarantee's margin split in two: <paramref name="Sampling"/>, the margin of the same method's family for a
/// single look (what sampling n examples costs with no comparison at all: <paramref name="SamplingMethod"/> with M = 1),
/// and <paramref name="Comparisons"/>, the rest, what comparing the looks costs.
/// </summary>
public sealed record MarginSplit(double Sampling, double Comparisons, string SamplingMethod);
