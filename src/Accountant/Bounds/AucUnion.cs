namespace Accountant.Bounds;

/// <summary>
/// A distribution-free bound on the AUC (Agarwal et al. 2005, JMLR 6:393, Thm 5), conditional on the labels, with a
/// union bound over M looks: for m positives and n negatives, P(|ÂUC − AUC| ≥ ε) ≤ 2·exp(−2mnε²/(m + n)), so
/// ε = sqrt((m + n)·ln(c·M/δ)/(2mn)) with c = 1 one-sided and 2 two-sided. Higher AUC is better: the conservative
/// side is the lower end.
/// </summary>
public static class AucUnion
{
    public const string Name = "auc-union";

    public static double Margin(long positives, long negatives, double logLooks, double delta, Sidedness sided = Sidedness.OneSided)
    {
        if (positives < 1 || negatives < 1)
        {
            throw AccountantException.BadInput("the AUC needs at least one positive and one negative example in the holdout.");
        }

        Require.Delta(delta);
        var l = logLooks - Math.Log(delta) + (sided == Sidedness.TwoSided ? Math.Log(2.0) : 0.0);
        return Math.Sqrt((positives + negatives) * l / (2.0 * positives * negatives));
    }

    /// <summary>mn/(m + n): the size that plays the part of n in Hoeffding's exponent 2nε².</summary>
    public static double EffectiveSize(long positives, long negatives) => positives * (double)negatives / (positives + negatives);

    /// <summary>The most looks whose margin stays within ε: ⌊(δ/c)·exp(2ε²·mn/(m + n))⌋, saturating.</summary>
    public static long MaxLooks(long positives, long negatives, double tolerance, double delta, Sidedness sided = Sidedness.OneSided)
    {
        Require.Tolerance(tolerance);
        Require.Delta(delta);
        var c = sided == Sidedness.TwoSided ? 2.0 : 1.0;
        var logM = Math.Log(delta / c) + 2.0 * tolerance * tolerance * EffectiveSize(positives, negatives);
        if (logM >= 43.0) return long.MaxValue;
        var m = (long)Math.Floor(Math.Exp(logM));
        while (m >= 1 && Margin(positives, negatives, Math.Log(m), delta, sided) > tolerance) m--;
        while (Margin(positives, negatives, Math.Log(m + 1), delta, sided) <= tolerance) m++;
        return Math.Max(0, m);
    }

    /// <summary>
    /// The AUC of scores against 0/1 labels: the fraction of (positive, negative) pairs ranked correctly, ties
    /// counting one half (the Mann–Whitney U statistic divided by mn). O(N log N).
    /// </summary>
    public static double Compute(IReadOnlyList<double> scores, IReadOnlyList<bool> positive)
    {
        var order = Enumerable.Range(0, scores.Count).OrderBy(i => scores[i]).ToArray();
        double rankSumPositives = 0;
        long positives = 0;
        var i0 = 0;
        while (i0 < order.Length)
        {
            var i1 = i0;
            while (i1 + 1 < order.Length && scores[order[i1 + 1]] == scores[order[i0]]) i1++;
            var midRank = (i0 + i1) / 2.0 + 1.0; // ranks are 1-based; ties share the mean rank
            for (var j = i0; j <= i1; j++)
            {
                if (positive[order[j]])
                {
                    rankSumPositives += midRank;
                    positives++;
                }
            }

            i0 = i1 + 1;
        }

        var negatives = scores.Count - positives;
        if (positives == 0 || negatives == 0)
        {
            throw AccountantException.BadInput("the AUC needs at least one positive and one negative example in the holdout.");
        }

        return (rankSumPositives - positives * (positives + 1) / 2.0) / (positives * (double)negatives);
    }
}
