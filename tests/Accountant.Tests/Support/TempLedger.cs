using Accountant.Ledger;
using Microsoft.Data.Sqlite;

namespace Accountant.Tests.Support;

/// <summary>The two ledger backends; every ledger test runs against both.</summary>
public enum Backend
{
    Sqlite,
    Postgres,
}

/// <summary>
/// A fresh, empty place for a ledger, removed afterwards: a file in a temporary folder (SQLite), or a schema of its own
/// on the tests' PostgreSQL server (<see cref="PostgresServer"/>).
/// </summary>
public sealed class TempLedger : IDisposable
{
    private readonly string? _schema;

    public TempLedger(Backend backend = Backend.Sqlite)
    {
        Backend = backend;
        Folder = System.IO.Path.Combine(System.IO.Path.GetTempPath(), "accountant-tests-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Folder);
        Path = System.IO.Path.Combine(Folder, "ledger.db");
        Location = backend == Backend.Postgres ? PostgresServer.NewSchema(out _schema) : Path;
    }

    public Backend Backend { get; }

    /// <summary>A temporary folder for files the test writes (for SQLite, the ledger file is in it).</summary>
    public string Folder { get; }

    /// <summary>The SQLite ledger file (unused by a PostgreSQL ledger).</summary>
    public string Path { get; }

    /// <summary>What --ledger would be given: the file path, or a PostgreSQL connection string naming the schema.</summary>
    public string Location { get; }

    public Bookkeeper Create() => Bookkeeper.Create(Location, new FixedClock());

    public Bookkeeper Open() => Bookkeeper.Open(Location, new FixedClock());

    /// <summary>Edits the stored rows behind the accountant's back, with the append-only triggers out of the way.</summary>
    public void Tamper(string sqliteSql, string postgresSql)
    {
        if (Backend == Backend.Postgres)
        {
            PostgresServer.Tamper(Location, postgresSql);
            return;
        }

        using var connection = new SqliteConnection($"Data Source={Path};Pooling=False");
        connection.Open();
        using var command = connection.CreateCommand();
        var drop = string.Join("", new[] { "entries", "holdouts", "looks", "voids", "openings", "guard_streams" }.Select(t => $"DROP TRIGGER IF EXISTS {t}_no_update; DROP TRIGGER IF EXISTS {t}_no_delete;"));
        command.CommandText = drop + sqliteSql;
        command.ExecuteNonQuery();
    }

    /// <summary>Examples "e001".."eNNN" with labels cycling through the given classes.</summary>
    public static List<HoldoutExample> Examples(int n, params string[] classes)
    {
        classes = classes.Length == 0 ? ["0", "1"] : classes;
        return Enumerable.Range(1, n).Select(i => new HoldoutExample($"e{i:000}", classes[i % classes.Length])).ToList();
    }

    /// <summary>Predictions equal to the labels except for the first <paramref name="wrong"/> examples.</summary>
    public static List<Prediction> Predictions(IReadOnlyList<HoldoutExample> examples, int wrong) =>
        examples.Select((e, i) => new Prediction(e.Id, i < wrong ? (e.Label == "0" ? "1" : "0") : e.Label)).ToList();

    public void Dispose()
    {
        if (_schema is not null)
        {
            try { PostgresServer.DropSchema(_schema); } catch (Npgsql.NpgsqlException) { }
        }

        try { Directory.Delete(Folder, recursive: true); } catch (IOException) { } catch (UnauthorizedAccessException) { }
    }
}

/// <summary>A clock that starts at a fixed instant and ticks one second per reading.</summary>
public sealed class FixedClock : TimeProvider
{
    private DateTimeOffset _now = new(2026, 1, 2, 3, 4, 5, TimeSpan.Zero);

    public override DateTimeOffset GetUtcNow()
    {
        var now = _now;
        _now = _now.AddSeconds(1);
        return now;
    }
}
