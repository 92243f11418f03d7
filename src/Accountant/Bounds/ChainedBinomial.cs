namespace Accountant.Bounds;

/// <summary>
/// A correlation-aware guarantee for 0/1 losses: two-level chaining (Dudley 1967, J. Funct. Anal. 1:290; in its finite form a
/// union bound taken in two stages, as in Talagrand 2005, The Generic Chaining, ch. 1) through an <b>anchor</b>, with the exact
/// binomial tail (Clopper &amp; Pearson 1934, Biometrika 26:404) at every stage.
/// <para>
/// An anchor is a 0/1 function of an example fixed before the holdout is drawn: here the majority vote of the recorded losses
/// of a set of looks (every look, or the looks of one trainer), which is a fixed function of the example once the
/// configurations are fixed, so its values on the i.i.d. holdout are i.i.d. Bernoulli(μ_a). For any look k and anchor a,
/// R_k = μ_a + p⁺ − p⁻, with p⁺ = P(look errs, anchor does not) and p⁻ = P(anchor errs, look does not). So, on the event that
/// every anchor's mean lies below its Clopper–Pearson upper limit at δ_A·w_a, and every p⁺ below its upper limit and every p⁻
/// above its lower limit at δ_I/(2·M·A) each (M looks, A anchors),
/// </para>
/// <para>R_k ≤ U(μ_a) + U(p⁺_{k,a}) − L(p⁻_{k,a}) for every look k and every anchor a at once,</para>
/// <para>
/// and that event fails with probability at most δ_A + δ_I = δ (Bonferroni). The bound for the selected look is the smallest
/// over the anchors, so it holds whichever look was selected and whichever anchor gives it. When the looks make nearly the
/// same mistakes, an anchor's μ_a costs about what one look costs, and the increments p⁺, p⁻ are small and cheap to bound
/// even at δ_I/(2MA): the union's price is paid on the small differences, not on the whole error. When the looks are
/// independent the increments are as large as the errors and the plain union bound (<see cref="BinomialUnion"/>) is tighter;
/// the statement lists both. A guarantee under the holdout's i.i.d. assumption and non-adaptive looks (the anchors must
/// not depend on the holdout through the choice of configurations).
/// </para>
/// </summary>
public static class ChainedBinomial
{
    public const string Name = "chained-binomial";

    /// <summary>The share of δ (per side) spent on the anchors; the rest goes to the increments. Fixed by design, before any
    /// data: an anchor's error is the large term and is bounded once, the increments are small and bounded 2·M·A times.</summary>
    public const double AnchorShare = 0.8;

    /// <summary>An anchor: its error count on the holdout and its share of the anchors' δ (the shares sum to at most 1).</summary>
    public readonly record struct Anchor(long Errors, double Weight);

    /// <summary>The selected look against one anchor: examples only the look gets wrong, and only the anchor gets wrong.</summary>
    public readonly record struct Increment(long OnlyLook, long OnlyAnchor);

    /// <summary>The interval, and the anchor that gave each end (its index in the list).</summary>
    public sealed record Result(Interval Interval, int UpperAnchor, int LowerAnchor);

    /// <summary>
    /// The bound on the selected look's true error from its counts against each anchor. <paramref name="looks"/> is M, every
    /// look on the holdout (each could have been selected); <paramref name="increments"/>[a] belongs to <paramref name="anchors"/>[a].
    /// </summary>
    public static Result Bound(long n, long looks, IReadOnlyList<Anchor> anchors, IReadOnlyList<Increment> increments, double delta, Sidedness sided = Sidedness.OneSided)
    {
        Require.Looks(looks);
        Require.Delta(delta);
        if (anchors.Count == 0 || anchors.Count != increments.Count)
        {
            throw new ArgumentException("every anchor needs the selected look's increments against it, and there must be at least one anchor.");
        }

        var weights = 0.0;
        foreach (var a in anchors)
        {
            if (!(a.Weight > 0)) throw new ArgumentException("an anchor's weight must be positive.");
            weights += a.Weight;
        }

        if (weights > 1 + 1e-12) throw new ArgumentException("the anchors' weights must sum to at most 1.");
        var side = sided == Sidedness.TwoSided ? delta / 2 : delta;
        var perIncrement = side * (1 - AnchorShare) / (2.0 * looks * anchors.Count);
        double upper = 1.0, lower = 0.0;
        int upperAnchor = 0, lowerAnchor = 0;
        for (var i = 0; i < anchors.Count; i++)
        {
            var (errors, weight) = anchors[i];
            var (onlyLook, onlyAnchor) = increments[i];
            var perAnchor = side * AnchorShare * weight;
            var up = BinomialTail.Upper(errors, n, perAnchor) + BinomialTail.Upper(onlyLook, n, perIncrement) - BinomialTail.Lower(onlyAnchor, n, perIncrement);
            if (up < upper)
            {
                upper = up;
                upperAnchor = i;
            }

            if (sided == Sidedness.TwoSided)
            {
                var down = BinomialTail.Lower(errors, n, perAnchor) + BinomialTail.Lower(onlyLook, n, perIncrement) - BinomialTail.Upper(onlyAnchor, n, perIncrement);
                if (down > lower)
                {
                    lower = down;
                    lowerAnchor = i;
                }
            }
        }

        return new Result(new Interval(Math.Max(0.0, lower), Math.Clamp(upper, 0.0, 1.0)), upperAnchor, lowerAnchor);
    }

    /// <summary>
    /// The effective number of comparisons: the M' at which the plain union bound (<see cref="BinomialUnion"/>) on the same
    /// error count gives the same upper limit as this guarantee; 1 when this guarantee is at or below one look's bound, and
    /// null when it is above the union bound over every look (no correlation worth using).
    /// </summary>
    public static double? EffectiveComparisons(long errors, long n, long looks, double upper, double delta, Sidedness sided = Sidedness.OneSided)
    {
        double Union(double logLooks) => BinomialUnion.BoundLog(errors, n, logLooks, delta, sided).Upper;
        if (upper > Union(Math.Log(looks))) return null;
        if (upper <= Union(0.0)) return 1.0;
        double lo = 0.0, hi = Math.Log(looks);
        for (var i = 0; i < 60; i++)
        {
            var mid = 0.5 * (lo + hi);
            if (Union(mid) < upper) lo = mid; else hi = mid;
        }

        return Math.Exp(0.5 * (lo + hi));
    }
}
