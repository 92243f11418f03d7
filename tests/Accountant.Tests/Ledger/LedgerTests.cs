using Accountant.Bounds;
using Accountant.Ledger;
using Accountant.Tests.Support;
using Microsoft.Data.Sqlite;

namespace Accountant.Tests.Ledger;

/// <summary>The SQLite ledger against the shared ledger tests.</summary>
public sealed class SqliteLedgerTests() : LedgerTests(Backend.Sqlite)
{
    [Fact]
    public void Files_that_are_not_ledgers_are_refused()
    {
        File.WriteAllText(_temp.Path, "id,label\n1,0\n");
        Assert.Contains("not a SQLite file", Assert.Throws<AccountantException>(() => _temp.Open()).Message);
        File.Delete(_temp.Path);
        using (var connection = new SqliteConnection($"Data Source={_temp.Path};Pooling=False"))
        {
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = "CREATE TABLE t (x);";
            command.ExecuteNonQuery();
        }

        Assert.Contains("not an Accountant ledger", Assert.Throws<AccountantException>(() => _temp.Open()).Message);
        Assert.Contains("no ledger at", Assert.Throws<AccountantException>(() => Bookkeeper.Open(Path.Combine(_temp.Folder, "missing.db"))).Message);
    }

    [Fact]
    public void A_field_stored_with_the_wrong_type_is_caught_at_its_entry()
    {
        // SQLite keeps whatever value it is given (type affinity); PostgreSQL's typed columns cannot hold text in a score.
        Populate();
        _temp.Tamper("UPDATE looks SET score = 'low' WHERE number = 2;", "");
        using var book = _temp.Open();
        var report = book.Verify();
        Assert.False(report.Valid);
        Assert.Equal(3, report.FirstBadEntry); // SQLite reads 'low' as 0, so the entry's contents no longer match its hash.
    }

    protected override void Unguarded(string sql)
    {
        using var connection = new SqliteConnection($"Data Source={_temp.Path};Pooling=False");
        connection.Open();
        using var command = connection.CreateCommand();
        command.CommandText = sql;
        command.ExecuteNonQuery();
    }
}

/// <summary>The PostgreSQL ledger against the same tests (a schema of its own on the tests' throwaway server).</summary>
public sealed class PostgresLedgerTests() : LedgerTests(Backend.Postgres)
{
    [Fact]
    public void Schemas_that_are_not_ledgers_are_refused()
    {
        Assert.Contains("no ledger at", Assert.Throws<AccountantException>(() => _temp.Open()).Message);
        PostgresServer.Execute("CREATE TABLE t (x integer);", _temp.Location);
        var error = Assert.Throws<AccountantException>(() => _temp.Open());
        Assert.Equal(ErrorKind.LedgerUnusable, error.Kind);
        Assert.Contains("no Accountant ledger", error.Message);
        Assert.Contains("holds tables", Assert.Throws<AccountantException>(() => _temp.Create()).Message);
    }

    [Fact]
    public void Messages_name_the_server_but_never_the_password()
    {
        var withPassword = new Npgsql.NpgsqlConnectionStringBuilder(_temp.Location) { Password = "s3cret-Value", Port = 1 }.ConnectionString;
        var error = Assert.Throws<AccountantException>(() => Bookkeeper.Open(withPassword));
        Assert.Equal(ErrorKind.LedgerUnusable, error.Kind);
        Assert.Contains("cannot reach the PostgreSQL server", error.Message);
        Assert.Contains("postgresql://accountant@127.0.0.1:1/", error.Message);
        Assert.DoesNotContain("s3cret", error.Message);
    }

    [Fact]
    public void Truncate_is_refused_too()
    {
        Populate();
        var error = Assert.Throws<Npgsql.PostgresException>(() => Unguarded("TRUNCATE looks;"));
        Assert.Contains("append-only", error.MessageText);
    }

    protected override void Unguarded(string sql) => PostgresServer.Execute(sql, _temp.Location);
}

/// <summary>
/// The ledger's rules, run against each backend (one set of tests, two stores). The same operations under the same
/// clock give the same chain head on both, since the chain bytes come from one place.
/// </summary>
public abstract class LedgerTests(Backend backend) : IDisposable
{
    protected readonly TempLedger _temp = new(backend);

    public void Dispose()
    {
        _temp.Dispose();
        GC.SuppressFinalize(this);
    }

    /// <summary>Runs SQL against the stored rows with the ledger's own protections in place.</summary>
    protected abstract void Unguarded(string sql);

    private (Bookkeeper Book, List<HoldoutExample> Examples) WithHoldout(int n = 40)
    {
        var book = _temp.Create();
        var examples = TempLedger.Examples(n);
        book.RegisterHoldout("validation", examples);
        return (book, examples);
    }

    [Fact]
    public void Looks_are_numbered_per_holdout_and_survive_reopening()
    {
        var (book, examples) = WithHoldout();
        using (book)
        {
            var first = book.Record("validation", """{"trainer":"a","x":1}""", TempLedger.Predictions(examples, 4));
            var second = book.Record("validation", """{"x":2,"trainer":"a"}""", 0.25);
            book.RegisterHoldout("other", TempLedger.Examples(10));
            var third = book.Record("other", "{}", 0.5);
            Assert.Equal(1, first.Number);
            Assert.Equal(2, second.Number);
            Assert.Equal(1, third.Number);
            Assert.Equal(0.1, first.Score, 15);
            Assert.Equal("""{"trainer":"a","x":1}""", first.Configuration);
            Assert.Equal("""{"trainer":"a","x":2}""", second.Configuration);
        }

        using var reopened = _temp.Open();
        var looks = reopened.Store.Looks(reopened.Holdout("validation"));
        Assert.Equal([1, 2], looks.Select(l => l.Number));
        Assert.Equal(LossEncoding.Bitset, looks[0].LossEncoding);
        Assert.Equal(LossEncoding.None, looks[1].LossEncoding);
        var bits = reopened.Store.LossBytes(reopened.Holdout("validation"), 1)!;
        Assert.Equal(0b0000_1111, bits[0]);
        var report = reopened.Verify();
        Assert.True(report.Valid, report.Problem);
        Assert.Equal(5, report.Entries);
        Assert.Equal(reopened.Store.ChainHead(), report.Head);
    }

    [Fact]
    public void Fingerprint_depends_on_ids_and_labels_not_on_row_order()
    {
        var a = TempLedger.Examples(20);
        var sorted = a.OrderBy(e => e.Id, StringComparer.Ordinal).ToList();
        var reversed = Enumerable.Reverse(sorted).OrderBy(e => e.Id, StringComparer.Ordinal).ToList();
        Assert.Equal(Fingerprint.Compute(sorted), Fingerprint.Compute(reversed));
        var changed = sorted.Select((e, i) => i == 3 ? e with { Label = "2" } : e).ToList();
        Assert.NotEqual(Fingerprint.Compute(sorted), Fingerprint.Compute(changed));
        Assert.Equal("1", Fingerprint.CanonicalLabel(" 1.0 "));
        Assert.Equal("cat", Fingerprint.CanonicalLabel(" cat"));
    }

    [Fact]
    public void Regression_losses_are_clipped_float32_and_the_score_is_their_mean()
    {
        using var book = _temp.Create();
        var examples = Enumerable.Range(1, 4).Select(i => new HoldoutExample($"r{i}", (i * 1.5).ToString(System.Globalization.CultureInfo.InvariantCulture))).ToList();
        book.RegisterHoldout("prices", examples, Metric.AbsoluteError, new LossRange(0, 2));
        // Labels 1.5, 3, 4.5, 6; predictions off by 0.5, 1, 3 (clipped to 2), 0.
        var look = book.Record("prices", "{}", [new("r1", "2"), new("r2", "4"), new("r3", "1.5"), new("r4", "6")]);
        Assert.Equal((0.5 + 1 + 2 + 0) / 4, look.Score, 12);
        var squared = Bookkeeper.Create(Path.Combine(_temp.Folder, "sq.db"));
        using (squared)
        {
            squared.RegisterHoldout("prices", examples, Metric.SquaredError, new LossRange(0, 10));
            Assert.Equal((0.25 + 1 + 9 + 0) / 4, squared.Record("prices", "{}", [new("r1", "2"), new("r2", "4"), new("r3", "1.5"), new("r4", "6")]).Score, 12);
        }
    }

    public static TheoryData<string, Func<List<HoldoutExample>, List<Prediction>>> BadPredictions() => new()
    {
        { "missing id", ex => TempLedger.Predictions(ex, 0).Skip(1).ToList() },
        { "extra id", ex => [.. TempLedger.Predictions(ex, 0), new Prediction("zzz", "1")] },
        { "duplicated id", ex => [.. TempLedger.Predictions(ex, 0), TempLedger.Predictions(ex, 0)[5]] },
        { "different label", ex => TempLedger.Predictions(ex, 0).Select((p, i) => i == 2 ? p with { Label = p.Value == "1" ? "0" : "1" } : p with { Label = p.Value }).ToList() },
        { "empty prediction", ex => TempLedger.Predictions(ex, 0).Select((p, i) => i == 0 ? p with { Value = " " } : p).ToList() },
    };

    [Theory]
    [MemberData(nameof(BadPredictions))]
    public void Predictions_that_do_not_match_the_holdout_are_refused_and_nothing_is_written(string what, Func<List<HoldoutExample>, List<Prediction>> make)
    {
        var (book, examples) = WithHoldout();
        using (book)
        {
            var head = book.Store.ChainHead();
            var error = Assert.Throws<AccountantException>(() => book.Record("validation", "{}", make(examples)));
            Assert.Equal(ErrorKind.BadInput, error.Kind);
            Assert.Equal(head, book.Store.ChainHead());
            Assert.Empty(book.Store.Looks(book.Holdout("validation")));
            Assert.False(string.IsNullOrWhiteSpace(what));
        }
    }

    [Theory]
    [InlineData(double.NaN)]
    [InlineData(double.PositiveInfinity)]
    [InlineData(-0.01)]
    [InlineData(1.5)]
    [InlineData(87.5)]
    public void Bad_scores_are_refused_before_anything_is_written(double score)
    {
        var (book, _) = WithHoldout();
        using (book)
        {
            var head = book.Store.ChainHead();
            var error = Assert.Throws<AccountantException>(() => book.Record("validation", "{}", score));
            Assert.Equal(ErrorKind.BadInput, error.Kind);
            Assert.Equal(head, book.Store.ChainHead());
        }
    }

    [Fact]
    public void A_batch_with_one_bad_look_writes_nothing_and_names_the_look()
    {
        var (book, _) = WithHoldout();
        using (book)
        {
            var inputs = new[] { 0.1, 0.2, double.NaN, 0.3 }.Select(s => new LookInput { Configuration = "{}", Score = s }).ToList();
            var error = Assert.Throws<AccountantException>(() => book.RecordMany("validation", inputs));
            Assert.StartsWith("look 3 of 4:", error.Message);
            Assert.Empty(book.Store.Looks(book.Holdout("validation")));
        }
    }

    [Theory]
    [InlineData("not json")]
    [InlineData("[1,2]")]
    [InlineData("""{"a":1,"a":2}""")]
    [InlineData("""{"a":1,}""")]
    public void Invalid_configurations_are_refused(string configuration)
    {
        var (book, _) = WithHoldout();
        using (book)
        {
            Assert.Equal(ErrorKind.BadInput, Assert.Throws<AccountantException>(() => book.Record("validation", configuration, 0.1)).Kind);
        }
    }

    [Fact]
    public void Holdouts_with_duplicate_or_empty_ids_are_refused()
    {
        using var book = _temp.Create();
        var duplicate = new List<HoldoutExample> { new("a", "1"), new(" a ", "0") };
        Assert.Contains("share the id 'a'", Assert.Throws<AccountantException>(() => book.RegisterHoldout("h", duplicate)).Message);
        Assert.Throws<AccountantException>(() => book.RegisterHoldout("h", [new("", "1")]));
        Assert.Throws<AccountantException>(() => book.RegisterHoldout("h", []));
        Assert.Throws<AccountantException>(() => book.RegisterHoldout("h", [new("a", "x")], Metric.AbsoluteError, new LossRange(0, 1)));
        Assert.Throws<AccountantException>(() => book.RegisterHoldout("h", [new("a", "1")], Metric.AbsoluteError));
        Assert.Null(book.Store.ChainHead());
    }

    [Fact]
    public void A_ledger_with_a_newer_schema_is_refused()
    {
        WithHoldout().Book.Dispose();
        _temp.Tamper("PRAGMA user_version = 99;", "UPDATE ledger_meta SET value = '99' WHERE key = 'schema_version';");
        var error = Assert.Throws<AccountantException>(() => _temp.Open());
        Assert.Equal(ErrorKind.LedgerUnusable, error.Kind);
        Assert.Contains("schema version 99", error.Message);
    }

    [Fact]
    public void Updates_and_deletes_are_refused_by_the_ledger_itself()
    {
        WithHoldout().Book.Dispose();
        foreach (var sql in new[] { "UPDATE holdouts SET name = 'x';", "DELETE FROM holdouts;", "UPDATE entries SET kind = 'x';", "DELETE FROM entries;" })
        {
            var error = Assert.ThrowsAny<System.Data.Common.DbException>(() => Unguarded(sql));
            Assert.Contains("append-only", error.Message);
        }
    }

    /// <summary>A ledger with a holdout, three looks (one with losses) and a void: six entries.</summary>
    protected void Populate()
    {
        var (book, examples) = WithHoldout();
        using (book)
        {
            book.Record("validation", """{"trainer":"a"}""", TempLedger.Predictions(examples, 3));
            book.Record("validation", """{"trainer":"b"}""", 0.2);
            book.Record("validation", """{"trainer":"c"}""", 0.3);
            book.Void("validation", 2, "trained on the wrong split");
            book.Record("validation", """{"trainer":"d"}""", 0.4);
        }
    }

    /// <summary>Edits, each in the same words for both backends unless a second form is given for PostgreSQL.</summary>
    public static TheoryData<string, string, string, long> Tampering() => new()
    {
        { "change a score", "UPDATE looks SET score = 0.01 WHERE number = 3;", "", 4 },
        { "change a configuration", """UPDATE looks SET configuration = '{"trainer":"z"}' WHERE number = 2;""", "", 3 },
        { "change a configuration and its digest", """UPDATE looks SET configuration = '{"trainer":"z"}', configuration_digest = 'e3b0' WHERE number = 2;""", "", 3 },
        { "change a loss bit", "UPDATE looks SET losses = zeroblob(5) WHERE number = 1;", "UPDATE looks SET losses = '\\x0000000000'::bytea WHERE number = 1;", 2 },
        { "change a holdout label", "UPDATE holdouts SET labels = replace(labels, X'31', X'30');", "UPDATE holdouts SET labels = decode(replace(encode(labels, 'hex'), '31', '30'), 'hex');", 1 },
        { "rename the holdout", "UPDATE holdouts SET name = 'other';", "", 1 },
        { "delete a look row", "DELETE FROM looks WHERE number = 2;", "", 3 },
        { "delete a look with its entry", "DELETE FROM looks WHERE number = 2; DELETE FROM entries WHERE seq = 3;", "", 3 },
        { "delete a void", "DELETE FROM voids; DELETE FROM entries WHERE kind = 'void';", "", 5 },
        { "reorder two looks", "UPDATE looks SET number = 100 WHERE number = 2; UPDATE looks SET number = 2 WHERE number = 3; UPDATE looks SET number = 3 WHERE number = 100;", "", 3 },
        { "insert a forged look", """INSERT INTO looks (seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, recorded_at) VALUES (99, 1, 5, '{}', 'x', 0.0, 0, 0, '2026-01-01T00:00:00.0000000Z');""", "", 99 },
        { "change a void's reason", "UPDATE voids SET reason = 'never mind';", "", 5 },
    };

    [Theory]
    [MemberData(nameof(Tampering))]
    public void Verify_detects_plain_sql_edits_and_names_the_first_bad_entry(string what, string sqliteSql, string postgresSql, long firstBad)
    {
        Populate();
        _temp.Tamper(sqliteSql, postgresSql.Length > 0 ? postgresSql : sqliteSql);
        using var book = _temp.Open();
        var report = book.Verify();
        Assert.False(report.Valid, what);
        Assert.Equal(firstBad, report.FirstBadEntry);
        Assert.False(string.IsNullOrEmpty(report.Problem));
    }

    /// <summary>A ledger with guard streams: holdout (1); stream 'noisy' (2) and its look (3); stream 'ladder:0.05' (4) and two looks (5, 6).</summary>
    private void PopulateStreams()
    {
        var (book, _) = WithHoldout();
        using (book)
        {
            book.GuardSeed = 5;
            book.RecordMany("validation", [new LookInput { Configuration = "{}", Score = 0.3, Guard = Accountant.Guards.GuardSpec.Thresholdout(0.02, 0.01, 5), TrainScore = 0.1, Stream = "noisy", Adaptive = true }]);
            book.RecordMany("validation", [new LookInput { Configuration = """{"a":1}""", Score = 0.4, Guard = Accountant.Guards.GuardSpec.Ladder(0.05) }]);
            book.RecordMany("validation", [new LookInput { Configuration = """{"a":2}""", Score = 0.3, Guard = Accountant.Guards.GuardSpec.Ladder(0.05), Adaptive = true }]);
        }
    }

    public static TheoryData<string, string, long> StreamTampering() => new()
    {
        { "change a stream's seed", "UPDATE guard_streams SET seed = 6 WHERE name = 'noisy';", 2 },
        { "change a stream's guard", "UPDATE guard_streams SET guard = 'thresholdout:0.03,0.01,5' WHERE name = 'noisy';", 2 },
        { "delete a stream row", "DELETE FROM guard_streams WHERE name = 'noisy';", 2 },
        { "delete a stream with its entry", "DELETE FROM guard_streams WHERE name = 'noisy'; DELETE FROM entries WHERE seq = 2;", 2 },
        { "move a look to another stream", "UPDATE looks SET stream = 'noisy' WHERE number = 3;", 6 },
        { "change a look's place in its stream", "UPDATE looks SET stream_index = 0 WHERE number = 3;", 6 },
        { "change a released value", "UPDATE looks SET released = 0.25 WHERE number = 3;", 6 },
    };

    [Theory]
    [MemberData(nameof(StreamTampering))]
    public void Verify_detects_edits_of_guard_streams(string what, string sql, long firstBad)
    {
        PopulateStreams();
        using (var book = _temp.Open()) Assert.True(book.Verify().Valid);
        _temp.Tamper(sql, sql);
        using var reopened = _temp.Open();
        var report = reopened.Verify();
        Assert.False(report.Valid, what);
        Assert.Equal(firstBad, report.FirstBadEntry);
        Assert.False(string.IsNullOrEmpty(report.Problem));
    }

    [Fact]
    public void Truncating_the_tail_is_detected_against_a_printed_head()
    {
        Populate();
        string head;
        using (var book = _temp.Open()) head = book.Store.ChainHead()!;
        const string cut = "DELETE FROM looks WHERE number = 4; DELETE FROM entries WHERE seq = 6;";
        _temp.Tamper(cut, cut);
        using var reopened = _temp.Open();
        Assert.True(reopened.Verify().Valid); // A clean cut looks like a shorter ledger...
        var report = reopened.Verify(head);   // ...but not against the head a statement printed.
        Assert.False(report.Valid);
        Assert.Contains("truncated", report.Problem);
        Assert.True(reopened.Verify(reopened.Store.ChainHead()).Valid);
    }
}
