namespace Accountant.Ledger;

/// <summary>
/// What a ledger backend offers so that several processes, on one machine or many, can work through one search plan.
/// A <b>plan</b> has a unique name, the settings every worker must share (opaque text, compared by the caller) and a list
/// of <b>tasks</b>, each one configuration at one stage. A task is <c>pending</c>, <c>claimed</c> (by one worker, until its
/// lease runs out) or <c>done</c> (with the number of the look it produced). Plans and tasks are coordination, mutable by
/// design, and not part of the hash chain; the looks that tasks produce are appended to the chain like any other look.
/// </summary>
/// <remarks>
/// <para>Every method is one transaction. Lease times are read from the store's <see cref="TimeProvider"/> (the worker's
/// clock). Nothing that is counted depends on clocks agreeing: a worker whose clock runs ahead may take over a task whose
/// lease has not really run out, and then the configuration is trained twice, but <see cref="Complete"/> records only the
/// first completion, so it is still counted once. Clocks kept by NTP agree far within a lease of minutes.</para>
/// <para>Task numbers run 1, 2, 3, … per plan in the order tasks were added; stage 0 is the plan's first stage.</para>
/// <para>Failures the user can act on are <see cref="AccountantException"/>s, and leave the plan and the ledger as they were.</para>
/// </remarks>
public interface ISharedPlanStore
{
    /// <summary>The plan of that name, or null when no worker has created it yet. Reads only.</summary>
    SharedPlan? FindPlan(string name);

    /// <summary>
    /// Creates the plan with <paramref name="firstStage"/> as its stage-0 tasks (numbered 1… in the order given, all
    /// pending), unless a plan of that name exists; returns the plan as stored. Atomic: when several workers call this at
    /// once, exactly one creates the plan and every one gets the same stored plan back. When the plan existed, nothing is
    /// written, whatever the arguments; the caller compares <see cref="SharedPlan.Settings"/> with its own.
    /// </summary>
    SharedPlan OpenPlan(string name, string holdout, string settings, IReadOnlyList<PlannedTask> firstStage);

    /// <summary>
    /// Claims one task for <paramref name="worker"/>: in one transaction, the lowest-numbered task that is pending, or
    /// claimed by anyone (this worker included) whose lease has run out (lease end at or before now). The claimed task gets
    /// this claimant, a lease ending <paramref name="lease"/> from now, and one more attempt. Two concurrent calls never
    /// claim the same task while its lease runs. The result also counts the plan's tasks after the claim, so a worker
    /// given no task can tell "wait: others are still working" (some claimed) from "finished" (none pending or claimed).
    /// </summary>
    TaskClaim Claim(SharedPlan plan, string worker, TimeSpan lease);

    /// <summary>
    /// Extends the lease of a task <paramref name="worker"/> holds to <paramref name="lease"/> from now. Returns false, and
    /// changes nothing, when the task is done or is now claimed by another worker (its lease ran out and it was taken).
    /// </summary>
    bool Renew(SharedPlan plan, int task, string worker, TimeSpan lease);

    /// <summary>
    /// Completes a task with its look, in ONE transaction that appends the look to the chain and marks the task done, so
    /// either both happen or neither. Completion is allowed to whichever worker finishes first: if the task is already
    /// done (another worker took it after this worker's lease ran out, and finished first), nothing is written,
    /// <paramref name="look"/> is not called, and the result is null: the configuration is counted once. Otherwise
    /// <paramref name="look"/> is called inside the transaction, after the chain's lock is held, and may read this store
    /// (a guard reads what was released before); its look is numbered after the holdout's last look. When this completion
    /// leaves no task of the task's stage pending or claimed and no later stage exists, <paramref name="nextStage"/> (if
    /// given) is called once, in the same transaction, with the stage's index and every task of that stage (in number
    /// order) with its look's score and released value, and the tasks it returns are added, pending, as the next stage:
    /// a stage is promoted exactly once, by whichever worker finishes it.
    /// An exception from either callback rolls everything back.
    /// </summary>
    Look? Complete(SharedPlan plan, int task, string worker, Holdout holdout, Func<NewLook> look,
        Func<int, IReadOnlyList<FinishedTask>, IReadOnlyList<PlannedTask>>? nextStage = null);

    /// <summary>Every task of the plan in number order, with its state, claimant, lease, attempts and look. Reads only.</summary>
    IReadOnlyList<PlanTask> Tasks(SharedPlan plan);

    /// <summary>
    /// Claims the plan's closing step, saving the selected look's model, for <paramref name="worker"/>, in one transaction,
    /// the way <see cref="Claim"/> claims a task: only once no task is pending or claimed (else
    /// <see cref="SaveState.Unfinished"/>, changing nothing); then, unless the step is done (<see cref="SaveState.Saved"/>)
    /// or held by another worker whose lease still runs (<see cref="SaveState.Held"/>), this worker gets it with a lease
    /// ending <paramref name="lease"/> from now and one more attempt (<see cref="SaveState.Claimed"/>). Two concurrent calls
    /// never both get it while its lease runs, so the model is saved once unless a holder outlives its lease.
    /// </summary>
    SaveClaim ClaimSave(SharedPlan plan, string worker, TimeSpan lease);

    /// <summary>Extends <paramref name="worker"/>'s lease on the closing step; false, changing nothing, when it is done or another worker holds it.</summary>
    bool RenewSave(SharedPlan plan, string worker, TimeSpan lease);

    /// <summary>
    /// Marks the closing step done by <paramref name="worker"/>, for look <paramref name="look"/>, with the place its record was
    /// written; false, changing nothing, unless this worker holds the step (another took it over after this one's lease ran out).
    /// </summary>
    bool CompleteSave(SharedPlan plan, string worker, int look, string location);

    /// <summary>The closing step as stored (null before any worker claimed it). Reads only.</summary>
    SaveClaim? FindSave(SharedPlan plan);

    /// <summary>
    /// The best score among the looks of the plan's done tasks (the lowest, or the highest when the holdout's metric is
    /// higher-is-better; voided looks included), or null before any task is done: what a worker shows as the search's best. Reads only.
    /// </summary>
    double? BestScore(SharedPlan plan, Holdout holdout);
}

/// <summary>Where a plan's closing step (saving the selected model) stands.</summary>
public enum SaveState
{
    /// <summary>Some task is still pending or claimed.</summary>
    Unfinished = 0,

    /// <summary>Held by a worker (the caller, after a successful claim), whose lease runs until <see cref="SaveClaim.LeaseEnds"/>.</summary>
    Claimed = 1,

    /// <summary>Done: the model and its record were saved.</summary>
    Saved = 2,

    /// <summary>Held by another worker whose lease has not run out.</summary>
    Held = 3,
}

/// <summary>The closing step of a plan: its state, the worker that holds (or held, or did) it, its attempts, and once saved the look and the record's place.</summary>
/// <param name="Remaining">With <see cref="SaveState.Unfinished"/>, how many tasks are pending or claimed.</param>
public sealed record SaveClaim(SaveState State, string? Worker, DateTimeOffset? LeaseEnds, int Attempts, int? Look, string? Location, int Remaining = 0);

/// <summary>A shared search plan as stored.</summary>
/// <param name="Key">The backend's key for the plan.</param>
/// <param name="Name">The name workers join it by.</param>
/// <param name="Holdout">The name of the holdout its looks go to.</param>
/// <param name="Settings">The settings every worker must share, as the first worker wrote them.</param>
public sealed record SharedPlan(long Key, string Name, string Holdout, string Settings, DateTimeOffset CreatedAt);

/// <summary>A task to add to a plan: one configuration (JSON) at one stage.</summary>
/// <param name="Stage">The stage label recorded with the look (e.g. the share of training rows), or null for a full look.</param>
/// <param name="Fraction">The share of the training rows to train on.</param>
/// <param name="Adaptive">Whether the configuration was chosen from earlier released values (recorded with the look).</param>
public sealed record PlannedTask(string Configuration, string? Stage, double Fraction, bool Adaptive);

public enum TaskState
{
    Pending = 0,
    Claimed = 1,
    Done = 2,
}

/// <summary>A task as stored.</summary>
/// <param name="Number">1, 2, 3, … within the plan.</param>
/// <param name="StageIndex">0 for the plan's first stage, 1 for the stage promoted from it, and so on.</param>
/// <param name="Claimant">The worker that holds or last held it.</param>
/// <param name="LeaseEnds">When the current claim runs out (meaningful while claimed).</param>
/// <param name="Attempts">How many times it was claimed.</param>
/// <param name="LookNumber">The look it produced, once done.</param>
/// <param name="CompletedBy">The worker whose look was recorded.</param>
public sealed record PlanTask(
    int Number, int StageIndex, string Configuration, string? Stage, double Fraction, bool Adaptive, TaskState State,
    string? Claimant, DateTimeOffset? LeaseEnds, int Attempts, int? LookNumber, string? CompletedBy);

/// <summary>The outcome of a claim: the task claimed (null when none could be), and the plan's counts after it.</summary>
public sealed record TaskClaim(PlanTask? Task, int Pending, int Claimed, int Done)
{
    /// <summary>Nothing left to claim and nothing in flight: the plan is finished (until a stage promotion adds tasks, which happens inside the completion that ends a stage, so never after this is seen).</summary>
    public bool Finished => Pending == 0 && Claimed == 0;
}

/// <summary>A done task of a stage, with what its look scored and what the guard released (null when refused or no guard).</summary>
public sealed record FinishedTask(int Number, string Configuration, int LookNumber, double Score, Released? Release)
{
    /// <summary>What a search may be told: the released value through a guard, else the score.</summary>
    public double? Told => Release is { } r ? r.Value : Score;
}
