using System.Text.Json;
using Accountant.Tests.Support;
using Npgsql;

namespace Accountant.Cli.Tests;

/// <summary>
/// The command line on a PostgreSQL ledger (a schema of its own on the tests' throwaway server, see
/// <see cref="PostgresServer"/>), and <c>copy</c> between the backends.
/// </summary>
public sealed class PostgresCliTests : IDisposable
{
    private readonly CliHarness _cli = new();
    private readonly List<string> _schemas = [];

    public void Dispose()
    {
        foreach (var schema in _schemas) PostgresServer.DropSchema(schema);
        _cli.Dispose();
    }

    /// <summary>A postgresql:// address of a schema that does not exist yet (init creates it).</summary>
    private string NewAddress()
    {
        var schema = "c_" + Guid.NewGuid().ToString("N")[..16];
        _schemas.Add(schema);
        var b = new NpgsqlConnectionStringBuilder(PostgresServer.ConnectionString);
        return $"postgresql://{b.Username}@{b.Host}:{b.Port}/{b.Database}?schema={schema}";
    }

    private void Populate(string ledger)
    {
        if (!ledger.StartsWith("postgresql://", StringComparison.Ordinal)) Assert.Equal(0, _cli.Run("init", "--ledger", ledger).Exit);
        Assert.Equal(0, _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(200), "--ledger", ledger).Exit);
        for (var i = 0; i < 6; i++)
        {
            Assert.Equal(0, _cli.Run("record", "validation", "--configuration", $"{{\"leaves\":{8 << i}}}", "--predictions", _cli.Predictions(200, 20 + 3 * i, $"p{i}.csv"), "--ledger", ledger).Exit);
        }

        Assert.Equal(0, _cli.Run("record", "validation", "--configuration", """{"leaves":1}""", "--score", "0.31", "--ledger", ledger).Exit);
        Assert.Equal(0, _cli.Run("void", "validation", "3", "--reason", "trained on the wrong split", "--ledger", ledger).Exit);
    }

    private string Head(string ledger)
    {
        var verify = _cli.Run("verify", "--format", "json", "--ledger", ledger);
        Assert.True(verify.Exit == 0, verify.Err);
        using var json = JsonDocument.Parse(verify.Out);
        Assert.True(json.RootElement.GetProperty("valid").GetBoolean());
        return json.RootElement.GetProperty("chainHead").GetString()!;
    }

    [Fact]
    public void Every_verb_works_on_a_postgresql_ledger_given_by_address_or_environment()
    {
        var address = NewAddress();
        var init = _cli.Run("init", "--ledger", address);
        Assert.True(init.Exit == 0, init.Err);
        Assert.Contains("created ledger postgresql://", init.Out);
        Assert.Equal(5, _cli.Run("init", "--ledger", address).Exit); // a ledger is already there
        Populate(address);
        Populate(_cli.Ledger);

        // ACCOUNTANT_LEDGER may hold the address too. The same looks give the same statement on either backend, bar the
        // chain head (the entries carry the time they were recorded).
        _cli.Variables["ACCOUNTANT_LEDGER"] = address;
        var statement = _cli.RunRaw(["statement", "validation", "--format", "json"]);
        Assert.True(statement.Exit == 0, statement.Err);
        using var json = JsonDocument.Parse(statement.Out);
        Assert.Equal(Head(address), json.RootElement.GetProperty("chainHead").GetString());
        var onSqlite = _cli.Run("statement", "validation", "--format", "json");
        Assert.Equal(Strip(onSqlite.Out), Strip(statement.Out));
        Assert.Equal(3, _cli.RunRaw(["holdout", "add", "validation", "--labels", _cli.Labels(10, "l2.csv")]).Exit); // the name is taken
    }

    /// <summary>The statement JSON without its chain head.</summary>
    private static string Strip(string json)
    {
        var node = System.Text.Json.Nodes.JsonNode.Parse(json)!.AsObject();
        node.Remove("chainHead");
        return node.ToJsonString();
    }

    [Fact]
    public void Copy_round_trips_sqlite_to_postgresql_to_sqlite_with_the_same_chain_head_and_statement()
    {
        Populate(_cli.Ledger);
        // A guard stream too (its declaration is an entry of its own), continued on the copy below.
        Assert.Equal(0, _cli.Run("record", "validation", "--configuration", """{"leaves":3}""", "--score", "0.3", "--guard", "thresholdout:0.02,0.01,3",
            "--train-score", "0.1", "--stream", "noisy", "--seed", "9", "--adaptive").Exit);
        var head = Head(_cli.Ledger);
        var statement = _cli.Run("statement", "validation", "--format", "markdown").Out;

        var address = NewAddress();
        var there = _cli.Run("copy", "--from", _cli.Ledger, "--to", address);
        Assert.True(there.Exit == 0, there.Err);
        Assert.Contains(head, there.Out);
        Assert.Equal(head, Head(address));
        Assert.Equal(statement, _cli.Run("statement", "validation", "--format", "markdown", "--ledger", address).Out);

        var back = Path.Combine(_cli.Folder, "back.db");
        var again = _cli.Run("copy", "--from", address, "--to", back, "--format", "json");
        Assert.True(again.Exit == 0, again.Err);
        using var json = JsonDocument.Parse(again.Out);
        Assert.Equal(head, json.RootElement.GetProperty("chainHead").GetString());
        Assert.Equal(11, json.RootElement.GetProperty("entries").GetInt32()); // a holdout, seven looks, a void, a stream and its look
        Assert.Equal(head, Head(back));
        Assert.Equal(statement, _cli.Run("statement", "validation", "--format", "markdown", "--ledger", back).Out);

        // The copy is a ledger like any other: a look recorded on it extends the chain, which still verifies.
        Assert.Equal(0, _cli.Run("record", "validation", "--configuration", "{}", "--score", "0.4", "--ledger", address).Exit);
        var continued = _cli.Run("record", "validation", "--configuration", """{"leaves":4}""", "--score", "0.3", "--guard", "thresholdout:0.02,0.01,3",
            "--train-score", "0.1", "--stream", "noisy", "--adaptive", "--format", "json", "--ledger", address);
        Assert.True(continued.Exit == 0, continued.Err);
        Assert.NotEqual(head, Head(address));
        using var verify = JsonDocument.Parse(_cli.Run("verify", "--format", "json", "--ledger", address).Out);
        Assert.Equal(2, verify.RootElement.GetProperty("holdouts")[0].GetProperty("releasesReplayed").GetInt32());
    }

    [Fact]
    public void Copy_refuses_a_target_that_is_taken_and_a_source_that_does_not_verify_and_writes_nothing()
    {
        Populate(_cli.Ledger);
        var taken = _cli.Write("taken.db", "x");
        var refused = _cli.Run("copy", "--from", _cli.Ledger, "--to", taken);
        Assert.Equal(2, refused.Exit);
        Assert.Contains("already exists", refused.Err);
        Assert.Equal("x", File.ReadAllText(taken));

        var full = NewAddress();
        Assert.Equal(0, _cli.Run("copy", "--from", _cli.Ledger, "--to", full).Exit);
        var second = _cli.Run("copy", "--from", _cli.Ledger, "--to", full);
        Assert.Equal(5, second.Exit);
        Assert.Contains("not empty", second.Err);

        // Tamper with the source: the copy is refused before anything is written.
        using (var connection = new Microsoft.Data.Sqlite.SqliteConnection($"Data Source={_cli.Ledger};Pooling=False"))
        {
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = "DROP TRIGGER looks_no_update; UPDATE looks SET score = 0.001 WHERE number = 2;";
            command.ExecuteNonQuery();
        }

        var target = Path.Combine(_cli.Folder, "copy.db");
        var bad = _cli.Run("copy", "--from", _cli.Ledger, "--to", target);
        Assert.Equal(4, bad.Exit);
        Assert.Contains("does not verify", bad.Err);
        Assert.False(File.Exists(target));
        Assert.Single(bad.Err.Trim().Split('\n'));
    }

    [Fact]
    public void Connection_problems_are_one_line_without_the_password()
    {
        var b = new NpgsqlConnectionStringBuilder(PostgresServer.ConnectionString);
        var wrongDatabase = _cli.Run("statement", "validation", "--ledger", $"postgresql://{b.Username}:hunter2-secret@{b.Host}:{b.Port}/no_such_database");
        Assert.Equal(5, wrongDatabase.Exit);
        Assert.Contains("does not exist", wrongDatabase.Err);
        Assert.DoesNotContain("hunter2", wrongDatabase.Err);
        Assert.Single(wrongDatabase.Err.Trim().Split('\n'));

        var badParameter = _cli.Run("statement", "validation", "--ledger", $"postgresql://{b.Host}:{b.Port}/x?colour=blue");
        Assert.Equal(2, badParameter.Exit);
        Assert.Contains("unknown parameter 'colour'", badParameter.Err);
    }
}
