using Accountant.Ledger;

namespace Accountant;

public sealed partial class Bookkeeper
{
    /// <summary>The ledger's shared search plans; a clear error when its backend cannot hold them.</summary>
    public ISharedPlanStore SharedPlans => Store as ISharedPlanStore ?? throw AccountantException.BadArguments(
        $"the ledger at '{Store.Location}' is on a backend that cannot hold shared searches; point --ledger at a SQLite ledger, or leave out --share.");

    /// <summary>
    /// Records the look of a claimed task of a shared plan and marks the task done, in one transaction
    /// (<see cref="ISharedPlanStore.Complete"/>). The input is checked completely before anything is written; its guard is
    /// applied inside the transaction, so that looks of concurrent workers are released in chain order, each from the
    /// releases recorded before it. Returns null, having written nothing, when another worker completed the task first.
    /// </summary>
    public Look? CompleteTask(SharedPlan plan, int task, string worker, LookInput input,
        Func<int, IReadOnlyList<FinishedTask>, IReadOnlyList<PlannedTask>>? nextStage = null)
    {
        var holdout = Holdout(plan.Holdout);
        IReadOnlyList<HoldoutExample>? examples = null;
        var prepared = Prepare(holdout, input, ref examples);
        return SharedPlans.Complete(plan, task, worker, holdout, () =>
        {
            if (input.Guard is not { } guard) return prepared;
            var known = examples;
            return Release(holdout, prepared, guard, input, Space(holdout, ref known), new Dictionary<string, OpenStream>(StringComparer.Ordinal));
        }, nextStage);
    }
}
