using Accountant.Bounds;
using Accountant.Ledger;

namespace Accountant.Tests.Support;

/// <summary>
/// A store that passes every call to another one, for tests that watch or change one call. It does not implement
/// <see cref="ILedgerStore.Tally"/>, so the interface's default (reading every look) applies.
/// </summary>
public class ForwardingStore(ILedgerStore inner) : ILedgerStore
{
    public string Location => inner.Location;
    public Holdout AddHoldout(string name, Metric metric, LossRange range, IReadOnlyList<HoldoutExample> sortedExamples) => inner.AddHoldout(name, metric, range, sortedExamples);
    public Holdout? FindHoldout(string name) => inner.FindHoldout(name);
    public IReadOnlyList<Holdout> Holdouts() => inner.Holdouts();
    public IReadOnlyList<HoldoutExample> Examples(Holdout holdout) => inner.Examples(holdout);
    public IReadOnlyList<Look> AppendLooks(Holdout holdout, IReadOnlyList<NewLook> looks) => inner.AppendLooks(holdout, looks);
    public IReadOnlyList<Look> AppendLooks(Holdout holdout, Func<IReadOnlyList<NewLook>> looks) => inner.AppendLooks(holdout, looks);
    public GuardStreamState? FindGuardStream(Holdout holdout, string name) => inner.FindGuardStream(holdout, name);
    public LookVoid AppendVoid(Holdout holdout, int lookNumber, string reason) => inner.AppendVoid(holdout, lookNumber, reason);
    public TestOpening AppendOpening(Holdout holdout, int lookNumber, int testSize, string testFingerprint, double testScore) => inner.AppendOpening(holdout, lookNumber, testSize, testFingerprint, testScore);
    public IReadOnlyList<TestOpening> Openings(Holdout holdout) => inner.Openings(holdout);
    public IReadOnlyList<Look> Looks(Holdout holdout) => inner.Looks(holdout);
    public IReadOnlyList<LookVoid> Voids(Holdout holdout) => inner.Voids(holdout);
    public virtual byte[]? LossBytes(Holdout holdout, int lookNumber) => inner.LossBytes(holdout, lookNumber);
    public string? ChainHead() => inner.ChainHead();
    public ChainReport Verify(string? expectedHead = null) => inner.Verify(expectedHead);
    public ILedgerRows Rows() => inner.Rows();
    public ChainReport Import(ILedgerRows source, string? expectedHead) => inner.Import(source, expectedHead);
    public void Dispose() => inner.Dispose();
}
