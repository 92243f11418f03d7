namespace Accountant.Guards;

/// <summary>One look as the adaptive accounting sees it: was it chosen adaptively, and through which guard was its value released.</summary>
public readonly record struct AccountedLook(bool Adaptive, GuardSpec Guard);

/// <summary>
/// The effective number of looks M_eff when some looks were chosen adaptively (the adaptive-transcript method).
/// <para>
/// Every look's configuration is a fixed function of what the search had been told before it. A non-adaptive
/// look is fixed before any score is seen: one candidate. An adaptive look t is one of at most N_{&lt;t} candidates,
/// one for each sequence of values the guards could have released before it, N_{&lt;t} = Π over guard streams of that
/// stream's count (<see cref="Guard.LogCount"/>); looks recorded without a guard were shown exactly. A union bound over
/// every candidate that could have been scored, M_eff = (non-adaptive looks) + Σ_{adaptive t} N_{&lt;t}, then covers the
/// looks actually scored, whichever release sequence occurred (Dwork et al. 2015, arXiv 1506.02629, Thm 9, with the prefix-sum
/// refinement noted in DESIGN.md). It never exceeds M·Π V_t, the cruder ln M + Σ ln V_t, and with no adaptive look it is M.
/// </para>
/// </summary>
public static class AdaptiveAccounting
{
    /// <summary>ln M_eff over the looks in the order they were recorded.</summary>
    public static double LogEffectiveLooks(IReadOnlyList<AccountedLook> looks, ValueSpace space)
    {
        var releases = new Dictionary<string, (GuardSpec Spec, int Count)>(StringComparer.Ordinal);
        var terms = new List<double>();
        var fixedLooks = 0L;
        foreach (var look in looks)
        {
            if (look.Adaptive)
            {
                terms.Add(releases.Values.Sum(r => Guard.LogCount(r.Spec, r.Count, space)));
            }
            else
            {
                fixedLooks++;
            }

            var key = look.Guard.ToString();
            releases[key] = releases.TryGetValue(key, out var r2) ? (r2.Spec, r2.Count + 1) : (look.Guard, 1);
        }

        if (fixedLooks > 0) terms.Add(Math.Log(fixedLooks));
        return terms.Count == 0 ? 0.0 : Guard.LogSumExp(terms);
    }

    /// <summary>Whether some adaptive look was chosen after a value had been released exactly (at full precision).</summary>
    public static bool HasUnguardedAdaptivity(IReadOnlyList<AccountedLook> looks)
    {
        var exactBefore = false;
        foreach (var look in looks)
        {
            if (look.Adaptive && exactBefore) return true;
            if (look.Guard.Kind == GuardKind.Exact) exactBefore = true;
        }

        return false;
    }
}
