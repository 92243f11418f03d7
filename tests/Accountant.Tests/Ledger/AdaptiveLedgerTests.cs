using Accountant.Bounds;
using Accountant.Guards;
using Accountant.Ledger;
using Accountant.Tests.Support;
using Microsoft.Data.Sqlite;

namespace Accountant.Tests.Ledger;

public sealed class PostgresAdaptiveLedgerTests() : AdaptiveLedgerContract(Backend.Postgres);

/// <summary>Guards and adaptive accounting through the ledger, on each backend.</summary>
public abstract class AdaptiveLedgerContract(Backend backend) : IDisposable
{
    protected readonly TempLedger _temp = new(backend);

    public void Dispose()
    {
        _temp.Dispose();
        GC.SuppressFinalize(this);
    }

    [Fact]
    public void Guarded_looks_return_the_released_value_and_keep_the_stream_state()
    {
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(1000));
        var ladder = GuardSpec.Ladder(0.01);
        var released = new[] { 0.30, 0.295, 0.28 }
            .Select(s => book.RecordMany("validation", [new LookInput { Configuration = "{}", Score = s, Guard = ladder, Adaptive = true }])[0].Release!.Value)
            .ToList();
        Assert.Equal([0.30, 0.30, 0.28], released);
        // A new Bookkeeper reads the stream's state back from the ledger.
        using var again = _temp.Open();
        var next = again.RecordMany("validation", [new LookInput { Configuration = "{}", Score = 0.275, Guard = ladder, Adaptive = true }])[0];
        Assert.Equal(0.28, next.Release!.Value);
        Assert.True(again.Verify().Valid);
    }

    [Fact]
    public void Adaptive_looks_switch_the_statement_to_release_sequence_accounting()
    {
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(2000));
        for (var i = 0; i < 5; i++) book.Record("validation", $"{{\"i\":{i}}}", 0.2 + i * 0.01);
        var fixedOnly = book.Statement("validation");
        Assert.Equal(Math.Log(5), fixedOnly.LogEffectiveLooks, 12);
        Assert.Contains(fixedOnly.Bounds, b => b.Method == BinomialUnion.Name);

        // Two adaptive looks after five exact releases: M_eff = 5 + 2001^5 + 2001^6.
        book.Record("validation", """{"i":5}""", 0.19, adaptive: true);
        book.Record("validation", """{"i":6}""", 0.18, adaptive: true);
        var statement = book.Statement("validation");
        Assert.Equal(2, statement.AdaptiveLooks);
        Assert.Equal(Math.Log(5 + Math.Pow(2001, 5) + Math.Pow(2001, 6)), statement.LogEffectiveLooks, 9);
        Assert.Equal([StatementBuilderTestsNames.Adaptive], statement.Bounds.Select(b => b.Method));
        Assert.Equal(BinomialUnion.BoundLog(360, 2000, statement.LogEffectiveLooks, 0.05).Upper, statement.Bounds[0].Bound, 12);
        Assert.Contains(statement.Warnings, w => w.Code == "adaptive-unguarded");
        Assert.True(statement.Budget.LooksUsed > 1_000_000);
    }

    [Fact]
    public void Guarded_adaptive_looks_are_counted_by_their_guard()
    {
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(2000));
        var guard = GuardSpec.Rounded(2);
        var inputs = Enumerable.Range(0, 6).Select(i => new LookInput { Configuration = $"{{\"i\":{i}}}", Score = 0.25 - 0.01 * i, Guard = guard, Adaptive = i >= 3 }).ToList();
        book.RecordMany("validation", inputs);
        var statement = book.Statement("validation");
        // 3 fixed looks, then adaptive looks after 3, 4 and 5 releases of 101 values each.
        Assert.Equal(Math.Log(3 + Math.Pow(101, 3) + Math.Pow(101, 4) + Math.Pow(101, 5)), statement.LogEffectiveLooks, 9);
        Assert.DoesNotContain(statement.Warnings, w => w.Code == "adaptive-unguarded");
    }

    [Fact]
    public void Tampering_with_a_release_is_detected()
    {
        using (var book = _temp.Create())
        {
            book.RegisterHoldout("validation", TempLedger.Examples(100));
            book.RecordMany("validation", [new LookInput { Configuration = "{}", Score = 0.2, Guard = GuardSpec.Ladder(0.05), Adaptive = true }]);
        }

        _temp.Tamper("UPDATE looks SET guard = NULL, released = NULL;", "UPDATE looks SET guard = NULL, released = NULL;");
        using var reopened = _temp.Open();
        Assert.False(reopened.Verify().Valid);
    }
}

/// <summary>The SQLite ledger: the shared tests, and upgrades of older SQLite schemas (PostgreSQL ledgers start at schema 3).</summary>
public sealed partial class AdaptiveLedgerTests() : AdaptiveLedgerContract(Backend.Sqlite)
{
    [Fact]
    public void A_schema_1_ledger_is_upgraded_in_place_with_its_chain_intact()
    {
        string head;
        using (var book = _temp.Create())
        {
            var examples = TempLedger.Examples(30);
            book.RegisterHoldout("validation", examples);
            book.Record("validation", """{"a":1}""", TempLedger.Predictions(examples, 3));
            book.Record("validation", """{"a":2}""", 0.2);
            book.Void("validation", 2, "typo");
            head = book.Store.ChainHead()!;
        }

        // Make it a schema-1 file: drop what schemas 4, 3 and 2 added.
        using (var connection = new SqliteConnection($"Data Source={_temp.Path};Pooling=False"))
        {
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = SchemaThreeSql + """
                ALTER TABLE looks DROP COLUMN guard; ALTER TABLE looks DROP COLUMN released;
                ALTER TABLE looks DROP COLUMN holdout_answered; ALTER TABLE looks DROP COLUMN train_score;
                DROP TRIGGER openings_no_update; DROP TRIGGER openings_no_delete; DROP TABLE openings;
                PRAGMA user_version = 1;
                """;
            command.ExecuteNonQuery();
        }

        using var upgraded = _temp.Open();
        var report = upgraded.Verify(head);
        Assert.True(report.Valid, report.Problem);
        Assert.Equal(head, report.Head);
        Assert.Equal(2, upgraded.Store.Looks(upgraded.Holdout("validation")).Count);
        using (var connection = new SqliteConnection($"Data Source={_temp.Path};Pooling=False"))
        {
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = "PRAGMA user_version;";
            Assert.Equal(SqliteLedgerStore.SchemaVersion, Convert.ToInt32(command.ExecuteScalar()));
        }

        upgraded.RecordMany("validation", [new LookInput { Configuration = "{}", Score = 0.1, Guard = GuardSpec.Exact, Adaptive = true }]);
        Assert.True(upgraded.Verify().Valid);
    }
}

public sealed partial class AdaptiveLedgerTests
{
    /// <summary>Turns a schema-4 SQLite ledger into a schema-3 one: drops the guard streams and the looks' stream columns.</summary>
    internal const string SchemaThreeSql = """
        DROP INDEX looks_by_stream; ALTER TABLE looks DROP COLUMN stream; ALTER TABLE looks DROP COLUMN stream_index; ALTER TABLE looks DROP COLUMN stream_answers;
        DROP TRIGGER guard_streams_no_update; DROP TRIGGER guard_streams_no_delete; DROP TABLE guard_streams;
        PRAGMA user_version = 3;
        """;
}

internal static class StatementBuilderTestsNames
{
    public const string Adaptive = "adaptive-transcript";
}
