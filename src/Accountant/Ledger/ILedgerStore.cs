using Accountant.Bounds;

namespace Accountant.Ledger;

/// <summary>
/// The narrow interface a ledger backend implements. Every write is one transaction that extends the chain;
/// nothing is ever updated or deleted. Implementations throw <see cref="AccountantException"/> for anything the
/// user can fix, and leave the ledger unchanged when they do.
/// </summary>
public interface ILedgerStore : IDisposable
{
    /// <summary>Where the ledger lives (a file path or a PostgreSQL address without its password), for messages.</summary>
    string Location { get; }

    /// <summary>Registers a holdout. Examples are sorted by id (ordinal) with canonical labels.</summary>
    Holdout AddHoldout(string name, Metric metric, LossRange range, IReadOnlyList<HoldoutExample> sortedExamples);

    Holdout? FindHoldout(string name);

    IReadOnlyList<Holdout> Holdouts();

    /// <summary>The holdout's examples in id order.</summary>
    IReadOnlyList<HoldoutExample> Examples(Holdout holdout);

    /// <summary>Appends looks in one transaction (all or none), numbering them after the holdout's last look.</summary>
    IReadOnlyList<Look> AppendLooks(Holdout holdout, IReadOnlyList<NewLook> looks) => AppendLooks(holdout, () => looks);

    /// <summary>
    /// Appends looks in one transaction (all or none). <paramref name="looks"/> is called inside the transaction once the
    /// chain's write lock is held, so what it reads from this store (a guard stream's state, <see cref="FindGuardStream"/>)
    /// cannot change before its looks are written: concurrent writers release on a stream one after the other, in chain
    /// order. A look's <see cref="NewLook.Opens"/> stream is declared (an entry of its own) before the batch's looks. An
    /// exception from the callback rolls everything back.
    /// </summary>
    IReadOnlyList<Look> AppendLooks(Holdout holdout, Func<IReadOnlyList<NewLook>> looks);

    /// <summary>One guard stream's recorded state on the holdout (null when it was never used); inside a write transaction
    /// it reads that transaction's view.</summary>
    GuardStreamState? FindGuardStream(Holdout holdout, string name);

    LookVoid AppendVoid(Holdout holdout, int lookNumber, string reason);

    /// <summary>Records that the sealed test set was opened for a look's configuration.</summary>
    TestOpening AppendOpening(Holdout holdout, int lookNumber, int testSize, string testFingerprint, double testScore);

    IReadOnlyList<TestOpening> Openings(Holdout holdout);

    /// <summary>The holdout's looks in number order, without their per-example losses.</summary>
    IReadOnlyList<Look> Looks(Holdout holdout);

    IReadOnlyList<LookVoid> Voids(Holdout holdout);

    /// <summary>
    /// The counts a statement needs and the best look whose number is not in <paramref name="voided"/> (lowest score, or
    /// highest when higher is better; the earliest on ties), without reading every look. Backends may compute it in the
    /// database (both do, through <see cref="LedgerReads.Tally"/>); this default reads every look.
    /// </summary>
    Statements.LookTally Tally(Holdout holdout, IReadOnlySet<int> voided)
    {
        var looks = Looks(holdout);
        var adaptive = looks.Count(l => l.Adaptive);
        return new Statements.LookTally(looks.Count, adaptive, looks.Count(l => !l.HasLosses),
            Statements.StatementBuilder.SelectBest(holdout.Metric, looks, voided),
            adaptive == 0 ? null : looks.Select(Statements.StatementBuilder.Accounted).ToList());
    }

    /// <summary>Every look's configuration and per-example losses in number order, streamed (no other call to this store may be
    /// made until the enumeration ends). This default reads them one look at a time.</summary>
    IEnumerable<LossRow> LossRows(Holdout holdout)
    {
        foreach (var look in Looks(holdout)) yield return new LossRow(look.Number, look.Configuration, look.LossEncoding, look.HasLosses ? LossBytes(holdout, look.Number) : null);
    }

    /// <summary>The stored per-example losses of one look, or null when only its score is known.</summary>
    byte[]? LossBytes(Holdout holdout, int lookNumber);

    /// <summary>The hash of the last entry, hex, or null for an empty ledger.</summary>
    string? ChainHead();

    /// <summary>Recomputes the chain from the stored rows and names the first entry that does not match.</summary>
    ChainReport Verify(string? expectedHead = null);

    /// <summary>The stored rows as they are, read from one snapshot: for verification and for copying to another backend.</summary>
    ILedgerRows Rows();

    /// <summary>
    /// Writes another ledger's rows into this one, which must be empty, unchanged and in one transaction, and commits only
    /// when the chain recomputed from the written rows verifies and (when given) contains <paramref name="expectedHead"/>.
    /// </summary>
    ChainReport Import(ILedgerRows source, string? expectedHead);
}
