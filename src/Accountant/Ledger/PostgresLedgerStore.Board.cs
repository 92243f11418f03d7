namespace Accountant.Ledger;

/// <summary>
/// Shared search plans in the PostgreSQL ledger (<see cref="ISharedPlanStore"/>, through <see cref="DbPlanBoard"/>). A claim
/// picks its task with <c>SELECT … FOR UPDATE SKIP LOCKED</c>, so workers on many machines claim different tasks at once
/// without waiting for each other; a completion takes the chain lock (<c>LOCK TABLE entries IN EXCLUSIVE MODE</c>, as
/// every append does) and locks its task's row, then appends the look and marks the task done in that one transaction.
/// Completions are therefore serialized, which is what makes a stage's promotion happen exactly once. Plans are created
/// under a transaction-level advisory lock, so two workers arriving together do not both create the tables or the plan.
/// </summary>
public sealed partial class PostgresLedgerStore : IPlanBoardHost
{
    private const string BoardTables = """
        CREATE TABLE IF NOT EXISTS shared_plans (
            id         bigint PRIMARY KEY,
            name       text NOT NULL UNIQUE,
            holdout    text NOT NULL,
            settings   text NOT NULL,
            created_at text NOT NULL
        );
        CREATE TABLE IF NOT EXISTS shared_tasks (
            plan_id       bigint NOT NULL,
            number        integer NOT NULL,
            stage_index   integer NOT NULL,
            configuration text NOT NULL,
            stage         text,
            fraction      double precision NOT NULL,
            adaptive      integer NOT NULL,
            state         integer NOT NULL,
            claimant      text,
            lease_ends    bigint,
            attempts      integer NOT NULL,
            look_number   integer,
            completed_by  text,
            PRIMARY KEY (plan_id, number)
        );
        CREATE TABLE IF NOT EXISTS shared_saves (
            plan_id     bigint PRIMARY KEY,
            state       integer NOT NULL,
            claimant    text NOT NULL,
            lease_ends  bigint NOT NULL,
            attempts    integer NOT NULL,
            look_number integer,
            location    text
        );
        """;

    private DbPlanBoard? _board;

    DbPlanBoard IPlanBoardHost.Board => _board ??= new DbPlanBoard(_connection, _clock, new BoardDialect(
        BoardTables,
        "SELECT CASE WHEN to_regclass('shared_tasks') IS NULL THEN 0 ELSE 1 END;",
        "SELECT CASE WHEN to_regclass('shared_saves') IS NULL THEN 0 ELSE 1 END;",
        ClaimLock: " FOR UPDATE SKIP LOCKED",
        RowLock: " FOR UPDATE",
        BeginCreate: () =>
        {
            var transaction = _connection.BeginTransaction();
            Execute("SELECT pg_advisory_xact_lock(4702018332);"); // any fixed key, one above the one init uses
            return transaction;
        },
        BeginClaim: () => _connection.BeginTransaction(),
        BeginAppend: BeginWrite,
        AppendLooksInTransaction));

    T IPlanBoardHost.Guard<T>(Func<T> action) => Guarded(action);
}
