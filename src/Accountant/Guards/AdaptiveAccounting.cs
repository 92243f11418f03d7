namespace Accountant.Guards;

/// <summary>One look as the adaptive accounting sees it: was it chosen adaptively, through which guard and on which stream
/// was its value released (a stream named by the guard's spelling when <paramref name="Stream"/> is null).</summary>
public readonly record struct AccountedLook(bool Adaptive, GuardSpec Guard, string? Stream = null)
{
    public string StreamName => Stream ?? Guard.ToString();
}

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
        var count = new EffectiveLooks(space);
        foreach (var look in looks) count.Add(look);
        return count.LogValue;
    }

    /// <summary>
    /// M_eff counted one look at a time, in the order they were recorded, without keeping the looks: the ledger's verifier
    /// recounts a holdout of a million looks this way. ln of the sum of the terms is kept as a running log-sum-exp.
    /// </summary>
    public sealed class EffectiveLooks(ValueSpace space)
    {
        private readonly Dictionary<string, (GuardSpec Spec, int Count)> _releases = new(StringComparer.Ordinal);
        private long _fixed;
        private double _max = double.NegativeInfinity, _scaled;

        public int Looks { get; private set; }

        public int Adaptive { get; private set; }

        public void Add(AccountedLook look)
        {
            Looks++;
            if (look.Adaptive)
            {
                Adaptive++;
                var term = 0.0;
                foreach (var (spec, count) in _releases.Values) term += Guard.LogCount(spec, count, space);
                if (term > _max)
                {
                    _scaled = _scaled * Math.Exp(_max - term) + 1;
                    _max = term;
                }
                else
                {
                    _scaled += Math.Exp(term - _max);
                }
            }
            else
            {
                _fixed++;
            }

            var key = look.StreamName;
            _releases[key] = _releases.TryGetValue(key, out var known) ? (known.Spec, known.Count + 1) : (look.Guard, 1);
        }

        /// <summary>ln M_eff: ln of (non-adaptive looks + Σ over adaptive looks of N_{&lt;t}); 0 with no looks.</summary>
        public double LogValue
        {
            get
            {
                if (_fixed == 0) return Adaptive == 0 ? 0.0 : _max + Math.Log(_scaled);
                if (Adaptive == 0) return Math.Log(_fixed);
                var logFixed = Math.Log(_fixed);
                var max = Math.Max(_max, logFixed);
                return max + Math.Log(_scaled * Math.Exp(_max - max) + Math.Exp(logFixed - max));
            }
        }
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
