using System.Globalization;
using Microsoft.Data.Sqlite;

namespace Accountant.Ledger;

/// <summary>
/// Shared search plans in the SQLite ledger (<see cref="ISharedPlanStore"/>). Two coordination tables, created on the first
/// shared search and left out of the chain and the schema version: they hold who is working on what, change as work
/// proceeds (no append-only triggers), and an older accountant that does not know them reads the ledger as before.
/// Every method is one <c>BEGIN IMMEDIATE</c> transaction, so claims are serialized by SQLite's write lock.
/// </summary>
public sealed partial class SqliteLedgerStore : ISharedPlanStore
{
    private const string BoardTables = """
        CREATE TABLE IF NOT EXISTS shared_plans (
            id         INTEGER PRIMARY KEY,
            name       TEXT NOT NULL UNIQUE,
            holdout    TEXT NOT NULL,
            settings   TEXT NOT NULL,
            created_at TEXT NOT NULL
        );
        CREATE TABLE IF NOT EXISTS shared_tasks (
            plan_id       INTEGER NOT NULL,
            number        INTEGER NOT NULL,
            stage_index   INTEGER NOT NULL,
            configuration TEXT NOT NULL,
            stage         TEXT,
            fraction      REAL NOT NULL,
            adaptive      INTEGER NOT NULL,
            state         INTEGER NOT NULL,
            claimant      TEXT,
            lease_ends    INTEGER,
            attempts      INTEGER NOT NULL,
            look_number   INTEGER,
            completed_by  TEXT,
            PRIMARY KEY (plan_id, number)
        );
        """;

    private const string TaskColumns = "number, stage_index, configuration, stage, fraction, adaptive, state, claimant, lease_ends, attempts, look_number, completed_by";

    private bool HasBoard() =>
        Convert.ToInt64(Scalar("SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = 'shared_tasks';"), CultureInfo.InvariantCulture) > 0;

    private long NowMilliseconds() => _clock.GetUtcNow().ToUnixTimeMilliseconds();

    public SharedPlan? FindPlan(string name) => Guarded(() => HasBoard() ? ReadPlan(name) : null);

    private SharedPlan? ReadPlan(string name)
    {
        using var command = Command("SELECT id, name, holdout, settings, created_at FROM shared_plans WHERE name = $name;");
        command.Parameters.AddWithValue("$name", name);
        using var reader = command.ExecuteReader();
        return reader.Read()
            ? new SharedPlan(reader.GetInt64(0), reader.GetString(1), reader.GetString(2), reader.GetString(3), Chain.ParseTimestamp(reader.GetString(4)))
            : null;
    }

    public SharedPlan OpenPlan(string name, string holdout, string settings, IReadOnlyList<PlannedTask> firstStage) => Guarded(() =>
    {
        if (HasBoard() && ReadPlan(name) is { } existing) return existing; // no write lock taken, nothing written

        using var transaction = _connection.BeginTransaction(deferred: false);
        Execute(_connection, BoardTables);
        if (ReadPlan(name) is { } raced) return raced; // another worker created it meanwhile; the rollback undoes nothing

        using (var insert = Command("INSERT INTO shared_plans (name, holdout, settings, created_at) VALUES ($name, $holdout, $settings, $created);"))
        {
            insert.Parameters.AddWithValue("$name", name);
            insert.Parameters.AddWithValue("$holdout", holdout);
            insert.Parameters.AddWithValue("$settings", settings);
            insert.Parameters.AddWithValue("$created", Chain.Timestamp(_clock.GetUtcNow()));
            insert.ExecuteNonQuery();
        }

        var plan = ReadPlan(name)!;
        InsertTasks(plan, 0, 1, firstStage);
        transaction.Commit();
        return plan;
    });

    private void InsertTasks(SharedPlan plan, int stageIndex, int firstNumber, IReadOnlyList<PlannedTask> tasks)
    {
        using var insert = Command("""
            INSERT INTO shared_tasks (plan_id, number, stage_index, configuration, stage, fraction, adaptive, state, attempts)
            VALUES ($plan, $number, $stageIndex, $configuration, $stage, $fraction, $adaptive, 0, 0);
            """);
        var parameters = new[] { "$plan", "$number", "$stageIndex", "$configuration", "$stage", "$fraction", "$adaptive" }
            .Select(n => insert.Parameters.Add(n, n is "$configuration" or "$stage" ? SqliteType.Text : n == "$fraction" ? SqliteType.Real : SqliteType.Integer)).ToArray();
        for (var i = 0; i < tasks.Count; i++)
        {
            var t = tasks[i];
            parameters[0].Value = plan.Key;
            parameters[1].Value = firstNumber + i;
            parameters[2].Value = stageIndex;
            parameters[3].Value = t.Configuration;
            parameters[4].Value = (object?)t.Stage ?? DBNull.Value;
            parameters[5].Value = t.Fraction;
            parameters[6].Value = t.Adaptive ? 1 : 0;
            insert.ExecuteNonQuery();
        }
    }

    public TaskClaim Claim(SharedPlan plan, string worker, TimeSpan lease) => Guarded(() =>
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        var now = NowMilliseconds();
        int? number = null;
        using (var pick = Command("""
            SELECT number FROM shared_tasks
            WHERE plan_id = $plan AND (state = 0 OR (state = 1 AND lease_ends <= $now))
            ORDER BY number LIMIT 1;
            """))
        {
            pick.Parameters.AddWithValue("$plan", plan.Key);
            pick.Parameters.AddWithValue("$now", now);
            if (pick.ExecuteScalar() is long found) number = (int)found;
        }

        PlanTask? claimed = null;
        if (number is { } n)
        {
            using (var update = Command("""
                UPDATE shared_tasks SET state = 1, claimant = $worker, lease_ends = $ends, attempts = attempts + 1
                WHERE plan_id = $plan AND number = $number;
                """))
            {
                update.Parameters.AddWithValue("$worker", worker);
                update.Parameters.AddWithValue("$ends", now + (long)lease.TotalMilliseconds);
                update.Parameters.AddWithValue("$plan", plan.Key);
                update.Parameters.AddWithValue("$number", n);
                update.ExecuteNonQuery();
            }

            claimed = ReadTasks(plan, n).Single();
        }

        var counts = new int[3];
        using (var count = Command("SELECT state, count(*) FROM shared_tasks WHERE plan_id = $plan GROUP BY state;"))
        {
            count.Parameters.AddWithValue("$plan", plan.Key);
            using var reader = count.ExecuteReader();
            while (reader.Read()) counts[reader.GetInt32(0)] = reader.GetInt32(1);
        }

        transaction.Commit();
        return new TaskClaim(claimed, counts[0], counts[1], counts[2]);
    });

    public bool Renew(SharedPlan plan, int task, string worker, TimeSpan lease) => Guarded(() =>
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        using var update = Command("""
            UPDATE shared_tasks SET lease_ends = $ends
            WHERE plan_id = $plan AND number = $number AND state = 1 AND claimant = $worker;
            """);
        update.Parameters.AddWithValue("$ends", NowMilliseconds() + (long)lease.TotalMilliseconds);
        update.Parameters.AddWithValue("$plan", plan.Key);
        update.Parameters.AddWithValue("$number", task);
        update.Parameters.AddWithValue("$worker", worker);
        var renewed = update.ExecuteNonQuery() == 1;
        transaction.Commit();
        return renewed;
    });

    public Look? Complete(SharedPlan plan, int task, string worker, Holdout holdout, Func<NewLook> look,
        Func<int, IReadOnlyList<FinishedTask>, IReadOnlyList<PlannedTask>>? nextStage = null) => Guarded(() =>
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        var stored = ReadTasks(plan, task).SingleOrDefault()
                     ?? throw AccountantException.BadArguments($"the shared search '{plan.Name}' has no task {task}.");
        if (stored.State == TaskState.Done) return null; // completed by another worker first; the rollback writes nothing

        var written = AppendLooksInTransaction(holdout, [look()])[0];
        using (var done = Command("""
            UPDATE shared_tasks SET state = 2, look_number = $look, completed_by = $worker
            WHERE plan_id = $plan AND number = $number;
            """))
        {
            done.Parameters.AddWithValue("$look", written.Number);
            done.Parameters.AddWithValue("$worker", worker);
            done.Parameters.AddWithValue("$plan", plan.Key);
            done.Parameters.AddWithValue("$number", task);
            done.ExecuteNonQuery();
        }

        if (nextStage is not null)
        {
            var stage = ReadTasks(plan).Where(t => t.StageIndex >= stored.StageIndex).ToList();
            var thisStage = stage.Where(t => t.StageIndex == stored.StageIndex).ToList();
            // Promoted once: the completion that leaves the stage with no open task, when no later stage exists yet.
            if (thisStage.All(t => t.State == TaskState.Done) && stage.All(t => t.StageIndex == stored.StageIndex))
            {
                var next = nextStage(stored.StageIndex, Finished(holdout, thisStage));
                var last = Convert.ToInt32(ScalarWith("SELECT COALESCE(MAX(number), 0) FROM shared_tasks WHERE plan_id = $plan;", ("$plan", plan.Key)), CultureInfo.InvariantCulture);
                InsertTasks(plan, stored.StageIndex + 1, last + 1, next);
            }
        }

        transaction.Commit();
        return written;
    });

    /// <summary>The stage's tasks with their looks' scores and releases, in task order.</summary>
    private List<FinishedTask> Finished(Holdout holdout, IReadOnlyList<PlanTask> tasks)
    {
        using var command = Command("SELECT score, guard, released, holdout_answered, train_score FROM looks WHERE holdout_id = $id AND number = $number;");
        command.Parameters.AddWithValue("$id", holdout.Key);
        var number = command.Parameters.Add("$number", SqliteType.Integer);
        var finished = new List<FinishedTask>(tasks.Count);
        foreach (var t in tasks)
        {
            number.Value = t.LookNumber!.Value;
            using var reader = command.ExecuteReader();
            if (!reader.Read())
            {
                throw new AccountantException(ErrorKind.Integrity, $"task {t.Number} of shared search names look {t.LookNumber}, which holdout '{holdout.Name}' does not have; run 'accountant verify'.");
            }

            finished.Add(new FinishedTask(t.Number, t.Configuration, t.LookNumber.Value, reader.GetDouble(0), ReadRelease(reader, 1)));
        }

        return finished;
    }

    public IReadOnlyList<PlanTask> Tasks(SharedPlan plan) => Guarded(() => ReadTasks(plan));

    private List<PlanTask> ReadTasks(SharedPlan plan, int? only = null)
    {
        using var command = Command($"SELECT {TaskColumns} FROM shared_tasks WHERE plan_id = $plan {(only is null ? "" : "AND number = $number")} ORDER BY number;");
        command.Parameters.AddWithValue("$plan", plan.Key);
        if (only is { } n) command.Parameters.AddWithValue("$number", n);
        using var reader = command.ExecuteReader();
        var tasks = new List<PlanTask>();
        while (reader.Read())
        {
            tasks.Add(new PlanTask(
                reader.GetInt32(0), reader.GetInt32(1), reader.GetString(2), reader.IsDBNull(3) ? null : reader.GetString(3), reader.GetDouble(4),
                reader.GetInt32(5) != 0, (TaskState)reader.GetInt32(6), reader.IsDBNull(7) ? null : reader.GetString(7),
                reader.IsDBNull(8) ? null : DateTimeOffset.FromUnixTimeMilliseconds(reader.GetInt64(8)), reader.GetInt32(9),
                reader.IsDBNull(10) ? null : reader.GetInt32(10), reader.IsDBNull(11) ? null : reader.GetString(11)));
        }

        return tasks;
    }
}
