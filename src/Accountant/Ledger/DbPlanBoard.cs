using System.Data;
using System.Data.Common;
using System.Globalization;

namespace Accountant.Ledger;

/// <summary>How one backend spells the few things of <see cref="DbPlanBoard"/> that differ between SQLite and PostgreSQL.</summary>
/// <param name="Ddl">Creates the coordination tables that are missing (run inside <paramref name="BeginCreate"/>; every statement is CREATE … IF NOT EXISTS).</param>
/// <param name="HasTables">A query giving 1 when the coordination tables exist, else 0.</param>
/// <param name="HasSaves">A query giving 1 when the closing steps' table exists, else 0 (a ledger whose plans predate it).</param>
/// <param name="ClaimLock">Appended to the query that picks a task to claim: PostgreSQL's <c>FOR UPDATE SKIP LOCKED</c>, so concurrent
/// claimers take different rows without waiting; empty for SQLite, whose write transaction already excludes other writers.</param>
/// <param name="RowLock">Appended to the query that reads the task being completed (<c>FOR UPDATE</c> on PostgreSQL).</param>
/// <param name="BeginCreate">A transaction in which only one worker at a time creates tables or a plan.</param>
/// <param name="BeginClaim">A transaction for claims and renewals.</param>
/// <param name="BeginAppend">A transaction that holds the chain's lock, as a look append needs.</param>
/// <param name="AppendLooks">The backend's look append, run inside the <paramref name="BeginAppend"/> transaction.</param>
internal sealed record BoardDialect(
    string Ddl,
    string HasTables,
    string HasSaves,
    string ClaimLock,
    string RowLock,
    Func<DbTransaction> BeginCreate,
    Func<DbTransaction> BeginClaim,
    Func<DbTransaction> BeginAppend,
    Func<Holdout, IReadOnlyList<NewLook>, List<Look>> AppendLooks);

/// <summary>
/// <see cref="ISharedPlanStore"/> in plain SQL that SQLite and PostgreSQL both accept, so both backends coordinate shared
/// searches with the same code. Three tables, <c>shared_plans</c>, <c>shared_tasks</c> and <c>shared_saves</c> (each plan's
/// closing step: saving the selected model), created on the first shared search;
/// they are coordination, not ledger: outside the chain and the schema version, changed as work proceeds (no append-only
/// triggers), and not carried by a copy of the ledger. Lease times are milliseconds since 1970 on the store's clock.
/// </summary>
internal sealed class DbPlanBoard(DbConnection connection, TimeProvider clock, BoardDialect dialect)
{
    private const string TaskColumns = "number, stage_index, configuration, stage, fraction, adaptive, state, claimant, lease_ends, attempts, look_number, completed_by";

    private long Now() => clock.GetUtcNow().ToUnixTimeMilliseconds();

    private bool HasTables() => Convert.ToInt64(Scalar(dialect.HasTables), CultureInfo.InvariantCulture) > 0;

    public SharedPlan? FindPlan(string name) => HasTables() ? ReadPlan(name) : null;

    private SharedPlan? ReadPlan(string name)
    {
        using var command = Command("SELECT id, name, holdout, settings, created_at FROM shared_plans WHERE name = @name;", ("@name", name));
        using var reader = command.ExecuteReader();
        return reader.Read()
            ? new SharedPlan(Convert.ToInt64(reader.GetValue(0), CultureInfo.InvariantCulture), reader.GetString(1), reader.GetString(2), reader.GetString(3), Chain.ParseTimestamp(reader.GetString(4)))
            : null;
    }

    public SharedPlan OpenPlan(string name, string holdout, string settings, IReadOnlyList<PlannedTask> firstStage)
    {
        if (HasTables() && ReadPlan(name) is { } existing) return existing; // nothing locked, nothing written

        using var transaction = dialect.BeginCreate();
        Execute(dialect.Ddl);
        if (ReadPlan(name) is { } raced) return raced; // another worker created it meanwhile; the rollback undoes nothing

        var id = Convert.ToInt64(Scalar("SELECT COALESCE(MAX(id), 0) + 1 FROM shared_plans;"), CultureInfo.InvariantCulture);
        Execute("INSERT INTO shared_plans (id, name, holdout, settings, created_at) VALUES (@id, @name, @holdout, @settings, @created);",
            ("@id", id), ("@name", name), ("@holdout", holdout), ("@settings", settings), ("@created", Chain.Timestamp(clock.GetUtcNow())));
        var plan = ReadPlan(name)!;
        InsertTasks(plan, 0, 1, firstStage);
        transaction.Commit();
        return plan;
    }

    private void InsertTasks(SharedPlan plan, int stageIndex, int firstNumber, IReadOnlyList<PlannedTask> tasks)
    {
        for (var i = 0; i < tasks.Count; i++)
        {
            var t = tasks[i];
            Execute("""
                INSERT INTO shared_tasks (plan_id, number, stage_index, configuration, stage, fraction, adaptive, state, attempts)
                VALUES (@plan, @number, @stageIndex, @configuration, @stage, @fraction, @adaptive, 0, 0);
                """, ("@plan", plan.Key), ("@number", firstNumber + i), ("@stageIndex", stageIndex), ("@configuration", t.Configuration),
                ("@stage", t.Stage), ("@fraction", t.Fraction), ("@adaptive", t.Adaptive ? 1 : 0));
        }
    }

    public TaskClaim Claim(SharedPlan plan, string worker, TimeSpan lease)
    {
        using var transaction = dialect.BeginClaim();
        var now = Now();
        var found = Scalar($"""
            SELECT number FROM shared_tasks
            WHERE plan_id = @plan AND (state = 0 OR (state = 1 AND lease_ends <= @now))
            ORDER BY number LIMIT 1{dialect.ClaimLock};
            """, ("@plan", plan.Key), ("@now", now));
        PlanTask? claimed = null;
        if (found is not null and not DBNull)
        {
            var number = Convert.ToInt32(found, CultureInfo.InvariantCulture);
            Execute("""
                UPDATE shared_tasks SET state = 1, claimant = @worker, lease_ends = @ends, attempts = attempts + 1
                WHERE plan_id = @plan AND number = @number;
                """, ("@worker", worker), ("@ends", now + (long)lease.TotalMilliseconds), ("@plan", plan.Key), ("@number", number));
            claimed = ReadTasks(plan, number).Single();
        }

        var counts = new long[3];
        using (var command = Command("SELECT state, count(*) FROM shared_tasks WHERE plan_id = @plan GROUP BY state;", ("@plan", plan.Key)))
        using (var reader = command.ExecuteReader())
        {
            while (reader.Read()) counts[Convert.ToInt32(reader.GetValue(0), CultureInfo.InvariantCulture)] = Convert.ToInt64(reader.GetValue(1), CultureInfo.InvariantCulture);
        }

        transaction.Commit();
        return new TaskClaim(claimed, (int)counts[0], (int)counts[1], (int)counts[2]);
    }

    public bool Renew(SharedPlan plan, int task, string worker, TimeSpan lease)
    {
        using var transaction = dialect.BeginClaim();
        var renewed = Execute("""
            UPDATE shared_tasks SET lease_ends = @ends
            WHERE plan_id = @plan AND number = @number AND state = 1 AND claimant = @worker;
            """, ("@ends", Now() + (long)lease.TotalMilliseconds), ("@plan", plan.Key), ("@number", task), ("@worker", worker)) == 1;
        transaction.Commit();
        return renewed;
    }

    public Look? Complete(SharedPlan plan, int task, string worker, Holdout holdout, Func<NewLook> look,
        Func<int, IReadOnlyList<FinishedTask>, IReadOnlyList<PlannedTask>>? nextStage)
    {
        using var transaction = dialect.BeginAppend();
        var stored = ReadTasks(plan, task, dialect.RowLock).SingleOrDefault()
                     ?? throw AccountantException.BadArguments($"the shared search '{plan.Name}' has no task {task}.");
        if (stored.State == TaskState.Done) return null; // another worker completed it first; the rollback writes nothing

        var written = dialect.AppendLooks(holdout, [look()])[0];
        Execute("UPDATE shared_tasks SET state = 2, look_number = @look, completed_by = @worker WHERE plan_id = @plan AND number = @number;",
            ("@look", written.Number), ("@worker", worker), ("@plan", plan.Key), ("@number", task));

        if (nextStage is not null)
        {
            // Completions hold the chain's lock, so they are serialized: the one that leaves the stage with no open task,
            // when no later stage exists yet, is the only one that promotes it.
            var later = ReadTasks(plan).Where(t => t.StageIndex >= stored.StageIndex).ToList();
            var stage = later.Where(t => t.StageIndex == stored.StageIndex).ToList();
            if (stage.All(t => t.State == TaskState.Done) && later.Count == stage.Count)
            {
                var next = nextStage(stored.StageIndex, Finished(holdout, stage));
                var last = Convert.ToInt32(Scalar("SELECT COALESCE(MAX(number), 0) FROM shared_tasks WHERE plan_id = @plan;", ("@plan", plan.Key)), CultureInfo.InvariantCulture);
                InsertTasks(plan, stored.StageIndex + 1, last + 1, next);
            }
        }

        transaction.Commit();
        return written;
    }

    /// <summary>The stage's tasks with their looks' scores and releases, in task order.</summary>
    private List<FinishedTask> Finished(Holdout holdout, IReadOnlyList<PlanTask> tasks)
    {
        var finished = new List<FinishedTask>(tasks.Count);
        foreach (var t in tasks)
        {
            using var command = Command("SELECT score, guard, released, holdout_answered, train_score, stream, stream_index, stream_answers FROM looks WHERE holdout_id = @id AND number = @number;",
                ("@id", holdout.Key), ("@number", t.LookNumber!.Value));
            using var reader = command.ExecuteReader();
            if (!reader.Read())
            {
                throw new AccountantException(ErrorKind.Integrity, $"task {t.Number} of a shared search names look {t.LookNumber}, which holdout '{holdout.Name}' does not have; run 'accountant verify'.");
            }

            finished.Add(new FinishedTask(t.Number, t.Configuration, t.LookNumber.Value, reader.GetDouble(0), DbLedgerRows.ReadRelease(reader, 1)));
        }

        return finished;
    }

    public IReadOnlyList<PlanTask> Tasks(SharedPlan plan) => ReadTasks(plan);

    private const string SaveColumns = "state, claimant, lease_ends, attempts, look_number, location";

    public SaveClaim ClaimSave(SharedPlan plan, string worker, TimeSpan lease)
    {
        // Under the creation lock: the closing step's table is newer than the plan tables, so a ledger whose plans were
        // made before it gets it here (every statement of the DDL is CREATE … IF NOT EXISTS).
        using var transaction = dialect.BeginCreate();
        Execute(dialect.Ddl);
        var open = Convert.ToInt32(Scalar("SELECT count(*) FROM shared_tasks WHERE plan_id = @plan AND state <> 2;", ("@plan", plan.Key)), CultureInfo.InvariantCulture);
        var now = Now();
        var stored = open > 0 ? null : ReadSave(plan);
        SaveClaim result;
        if (open > 0)
        {
            result = new SaveClaim(SaveState.Unfinished, null, null, 0, null, null, open);
        }
        else if (stored is null)
        {
            Execute($"INSERT INTO shared_saves (plan_id, {SaveColumns}) VALUES (@plan, 1, @worker, @ends, 1, NULL, NULL);",
                ("@plan", plan.Key), ("@worker", worker), ("@ends", now + (long)lease.TotalMilliseconds));
            result = ReadSave(plan)!;
        }
        else if (stored.State == SaveState.Saved || (stored.Worker != worker && stored.LeaseEnds!.Value.ToUnixTimeMilliseconds() > now))
        {
            result = stored.State == SaveState.Saved ? stored : stored with { State = SaveState.Held };
        }
        else
        {
            Execute("UPDATE shared_saves SET claimant = @worker, lease_ends = @ends, attempts = attempts + 1 WHERE plan_id = @plan;",
                ("@worker", worker), ("@ends", now + (long)lease.TotalMilliseconds), ("@plan", plan.Key));
            result = ReadSave(plan)!;
        }

        transaction.Commit();
        return result;
    }

    public bool RenewSave(SharedPlan plan, string worker, TimeSpan lease)
    {
        using var transaction = dialect.BeginClaim();
        var renewed = Execute("UPDATE shared_saves SET lease_ends = @ends WHERE plan_id = @plan AND state = 1 AND claimant = @worker;",
            ("@ends", Now() + (long)lease.TotalMilliseconds), ("@plan", plan.Key), ("@worker", worker)) == 1;
        transaction.Commit();
        return renewed;
    }

    public bool CompleteSave(SharedPlan plan, string worker, int look, string location)
    {
        using var transaction = dialect.BeginClaim();
        var completed = Execute("UPDATE shared_saves SET state = 2, look_number = @look, location = @location WHERE plan_id = @plan AND state = 1 AND claimant = @worker;",
            ("@look", look), ("@location", location), ("@plan", plan.Key), ("@worker", worker)) == 1;
        transaction.Commit();
        return completed;
    }

    public SaveClaim? FindSave(SharedPlan plan) => Convert.ToInt64(Scalar(dialect.HasSaves), CultureInfo.InvariantCulture) > 0 ? ReadSave(plan) : null;

    private SaveClaim? ReadSave(SharedPlan plan)
    {
        using var command = Command($"SELECT {SaveColumns} FROM shared_saves WHERE plan_id = @plan;", ("@plan", plan.Key));
        using var reader = command.ExecuteReader();
        if (!reader.Read()) return null;
        return new SaveClaim(
            (SaveState)Convert.ToInt32(reader.GetValue(0), CultureInfo.InvariantCulture), reader.GetString(1),
            DateTimeOffset.FromUnixTimeMilliseconds(Convert.ToInt64(reader.GetValue(2), CultureInfo.InvariantCulture)),
            Convert.ToInt32(reader.GetValue(3), CultureInfo.InvariantCulture),
            reader.IsDBNull(4) ? null : Convert.ToInt32(reader.GetValue(4), CultureInfo.InvariantCulture), reader.IsDBNull(5) ? null : reader.GetString(5));
    }

    public double? BestScore(SharedPlan plan, Holdout holdout)
    {
        var best = holdout.Metric.HigherIsBetter() ? "MAX" : "MIN";
        var value = Scalar($"""
            SELECT {best}(l.score) FROM shared_tasks t JOIN looks l ON l.holdout_id = @holdout AND l.number = t.look_number
            WHERE t.plan_id = @plan AND t.state = 2;
            """, ("@holdout", holdout.Key), ("@plan", plan.Key));
        return value is null or DBNull ? null : Convert.ToDouble(value, CultureInfo.InvariantCulture);
    }

    private List<PlanTask> ReadTasks(SharedPlan plan, int? only = null, string suffix = "")
    {
        var sql = $"SELECT {TaskColumns} FROM shared_tasks WHERE plan_id = @plan{(only is null ? "" : " AND number = @number")} ORDER BY number{suffix};";
        using var command = only is { } n ? Command(sql, ("@plan", plan.Key), ("@number", n)) : Command(sql, ("@plan", plan.Key));
        using var reader = command.ExecuteReader();
        var tasks = new List<PlanTask>();
        int Int(int i) => Convert.ToInt32(reader.GetValue(i), CultureInfo.InvariantCulture);
        string? Text(int i) => reader.IsDBNull(i) ? null : reader.GetString(i);
        while (reader.Read())
        {
            tasks.Add(new PlanTask(
                Int(0), Int(1), reader.GetString(2), Text(3), reader.GetDouble(4), Int(5) != 0, (TaskState)Int(6), Text(7),
                reader.IsDBNull(8) ? null : DateTimeOffset.FromUnixTimeMilliseconds(Convert.ToInt64(reader.GetValue(8), CultureInfo.InvariantCulture)),
                Int(9), reader.IsDBNull(10) ? null : Int(10), Text(11)));
        }

        return tasks;
    }

    private int Execute(string sql, params (string Name, object? Value)[] parameters)
    {
        using var command = Command(sql, parameters);
        return command.ExecuteNonQuery();
    }

    private object? Scalar(string sql, params (string Name, object? Value)[] parameters)
    {
        using var command = Command(sql, parameters);
        return command.ExecuteScalar();
    }

    private DbCommand Command(string sql, params (string Name, object? Value)[] parameters)
    {
        var command = connection.CreateCommand();
        command.CommandText = sql;
        foreach (var (name, value) in parameters)
        {
            var parameter = command.CreateParameter();
            parameter.ParameterName = name;
            (parameter.DbType, parameter.Value) = value switch
            {
                null => (DbType.String, DBNull.Value),
                int i => (DbType.Int64, (long)i),
                long l => (DbType.Int64, l),
                double d => (DbType.Double, d),
                _ => (DbType.String, value),
            };
            command.Parameters.Add(parameter);
        }

        return command;
    }
}

/// <summary>A ledger store whose <see cref="ISharedPlanStore"/> is a <see cref="DbPlanBoard"/>, each call under the store's own error translation.</summary>
internal interface IPlanBoardHost : ISharedPlanStore
{
    DbPlanBoard Board { get; }

    /// <summary>Runs a call, turning the backend's errors into <see cref="AccountantException"/>s that say what to do.</summary>
    T Guard<T>(Func<T> action);

    SharedPlan? ISharedPlanStore.FindPlan(string name) => Guard(() => Board.FindPlan(name));

    SharedPlan ISharedPlanStore.OpenPlan(string name, string holdout, string settings, IReadOnlyList<PlannedTask> firstStage) =>
        Guard(() => Board.OpenPlan(name, holdout, settings, firstStage));

    TaskClaim ISharedPlanStore.Claim(SharedPlan plan, string worker, TimeSpan lease) => Guard(() => Board.Claim(plan, worker, lease));

    bool ISharedPlanStore.Renew(SharedPlan plan, int task, string worker, TimeSpan lease) => Guard(() => Board.Renew(plan, task, worker, lease));

    Look? ISharedPlanStore.Complete(SharedPlan plan, int task, string worker, Holdout holdout, Func<NewLook> look,
        Func<int, IReadOnlyList<FinishedTask>, IReadOnlyList<PlannedTask>>? nextStage) =>
        Guard(() => Board.Complete(plan, task, worker, holdout, look, nextStage));

    IReadOnlyList<PlanTask> ISharedPlanStore.Tasks(SharedPlan plan) => Guard(() => Board.Tasks(plan));

    SaveClaim ISharedPlanStore.ClaimSave(SharedPlan plan, string worker, TimeSpan lease) => Guard(() => Board.ClaimSave(plan, worker, lease));

    bool ISharedPlanStore.RenewSave(SharedPlan plan, string worker, TimeSpan lease) => Guard(() => Board.RenewSave(plan, worker, lease));

    bool ISharedPlanStore.CompleteSave(SharedPlan plan, string worker, int look, string location) => Guard(() => Board.CompleteSave(plan, worker, look, location));

    SaveClaim? ISharedPlanStore.FindSave(SharedPlan plan) => Guard(() => Board.FindSave(plan));

    double? ISharedPlanStore.BestScore(SharedPlan plan, Holdout holdout) => Guard(() => Board.BestScore(plan, holdout));
}
