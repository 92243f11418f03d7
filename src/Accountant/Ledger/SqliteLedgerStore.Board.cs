namespace Accountant.Ledger;

/// <summary>
/// Shared search plans in the SQLite ledger (<see cref="ISharedPlanStore"/>, through <see cref="DbPlanBoard"/>). Every
/// method is one <c>BEGIN IMMEDIATE</c> transaction, so claims, renewals and completions are serialized by SQLite's write
/// lock, and a completion's look is appended inside the same transaction that marks its task done.
/// </summary>
public sealed partial class SqliteLedgerStore : IPlanBoardHost
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
        CREATE TABLE IF NOT EXISTS shared_saves (
            plan_id     INTEGER PRIMARY KEY,
            state       INTEGER NOT NULL,
            claimant    TEXT NOT NULL,
            lease_ends  INTEGER NOT NULL,
            attempts    INTEGER NOT NULL,
            look_number INTEGER,
            location    TEXT
        );
        """;

    private DbPlanBoard? _board;

    DbPlanBoard IPlanBoardHost.Board => _board ??= new DbPlanBoard(_connection, _clock, new BoardDialect(
        BoardTables,
        "SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = 'shared_tasks';",
        "SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = 'shared_saves';",
        ClaimLock: "",
        RowLock: "",
        BeginCreate: () => _connection.BeginTransaction(deferred: false),
        BeginClaim: () => _connection.BeginTransaction(deferred: false),
        BeginAppend: () => _connection.BeginTransaction(deferred: false),
        AppendLooksInTransaction));

    T IPlanBoardHost.Guard<T>(Func<T> action) => Guarded(action);
}
