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

    private static LookInput Guarded(int i, double score, GuardSpec guard, string? stream = null, double? train = null) =>
        new() { Configuration = $"{{\"i\":{i}}}", Score = score, Guard = guard, Stream = stream, TrainScore = train, Adaptive = true };

    /// <summary>Scores and training scores of a search whose training scores sometimes sit far below the holdout's.</summary>
    private static List<LookInput> ThresholdoutLooks(int count, GuardSpec guard, string? stream = null) =>
        Enumerable.Range(0, count).Select(i => Guarded(i, Math.Round(0.40 - 0.003 * i + (i * 37 % 11) / 1000.0, 3), guard, stream,
            train: Math.Round(0.40 - 0.003 * i - (i % 4 == 0 ? 0.06 : 0.005), 3))).ToList();

    [Fact]
    public void A_thresholdout_stream_continues_across_processes_exactly_as_one_process_releases_it()
    {
        // Thresholdout (Dwork et al. 2015, arXiv 1506.02629, Fig. 1) with its noise drawn from the stream's recorded seed:
        // 30 looks recorded by three Bookkeepers in turn (a restart between each) release exactly what one Bookkeeper
        // releases for the same looks on a fresh ledger with the same seed.
        var guard = GuardSpec.Thresholdout(0.02, 0.01, 8);
        var inputs = ThresholdoutLooks(30, guard);
        var released = new List<Released?>();
        using (var book = _temp.Create())
        {
            book.RegisterHoldout("validation", TempLedger.Examples(1000));
        }

        foreach (var part in inputs.Chunk(10))
        {
            // The first Bookkeeper declares the stream with a fixed seed (so the test does not depend on a random one, which
            // could leave the budget unspent); the later ones leave the seed out and continue with the stream's own.
            using var book = _temp.Open();
            if (released.Count == 0) book.GuardSeed = 20261203;
            released.AddRange(part.Select(input => book.RecordMany("validation", [input])[0].Release));
        }

        ulong seed;
        using (var book = _temp.Open())
        {
            var stream = book.Store.FindGuardStream(book.Holdout("validation"), guard.ToString())!;
            seed = stream.Declared!.Seed!.Value;
            Assert.Equal(new GuardState(30, 8, stream.State.LastReleased), stream.State); // the budget of 8 was spent
            Assert.True(book.Verify().Valid);
        }

        using var other = new TempLedger(_temp.Backend);
        using var single = other.Create();
        single.GuardSeed = seed;
        single.RegisterHoldout("validation", TempLedger.Examples(1000));
        Assert.Equal(released, single.RecordMany("validation", inputs).Select(l => l.Release));
        Assert.Equal(8, released.Count(r => r!.HoldoutAnswered));
        Assert.Contains(released, r => r!.Value is null); // refused once the budget was spent
    }

    [Fact]
    public void A_stream_keeps_its_guard_and_seed_and_a_mismatch_writes_nothing()
    {
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(200));
        book.RecordMany("validation", [Guarded(0, 0.3, GuardSpec.Ladder(0.01), stream: "tuning")]);
        book.GuardSeed = 7;
        book.RecordMany("validation", [Guarded(1, 0.3, GuardSpec.Thresholdout(0.02, 0.01, 5), stream: "noisy", train: 0.2)]);
        var head = book.Store.ChainHead();

        var otherGuard = Assert.Throws<AccountantException>(() => book.RecordMany("validation", [Guarded(2, 0.25, GuardSpec.Ladder(0.02), stream: "tuning")]));
        Assert.Equal(ErrorKind.BadArguments, otherGuard.Kind);
        Assert.Equal("the guard stream 'tuning' on holdout 'validation' releases by ladder:0.01, not ladder:0.02; give --guard ladder:0.01 for it, or name a new stream with --stream NAME.", otherGuard.Message);
        // The default stream of a guard is its spelling, so a look on it by another guard is refused, within a batch too.
        Assert.Throws<AccountantException>(() => book.RecordMany("validation", [Guarded(2, 0.25, GuardSpec.Rounded(2), stream: "ladder:0.01"), Guarded(3, 0.2, GuardSpec.Ladder(0.01))]));
        book.GuardSeed = 8;
        var otherSeed = Assert.Throws<AccountantException>(() => book.RecordMany("validation", [Guarded(2, 0.25, GuardSpec.Thresholdout(0.02, 0.01, 5), stream: "noisy", train: 0.2)]));
        Assert.Contains("draws its noise from seed 7, not 8", otherSeed.Message);
        var noGuard = Assert.Throws<AccountantException>(() => book.RecordMany("validation", [new LookInput { Configuration = "{}", Score = 0.2, Stream = "tuning" }]));
        Assert.Equal(ErrorKind.BadArguments, noGuard.Kind);
        // A batch with one bad stream writes none of its looks, not even those before it.
        var batch = Assert.Throws<AccountantException>(() => book.RecordMany("validation", [Guarded(5, 0.2, GuardSpec.Ladder(0.01), stream: "tuning"), Guarded(6, 0.2, GuardSpec.Exact, stream: "tuning")]));
        Assert.StartsWith("look 2 of 2: the guard stream 'tuning'", batch.Message);
        Assert.Equal(head, book.Store.ChainHead());

        // The right guard (and the stream's own seed, or none) continues the stream.
        book.GuardSeed = null;
        var next = book.RecordMany("validation", [Guarded(2, 0.25, GuardSpec.Ladder(0.01), stream: "tuning"), Guarded(3, 0.25, GuardSpec.Thresholdout(0.02, 0.01, 5), stream: "noisy", train: 0.2)]);
        Assert.Equal([1, 1], next.Select(l => l.Release!.Index!.Value));
        Assert.Equal(0.25, next[0].Release!.Value); // 0.25 beats the last released 0.30 by more than the step 0.01
        var report = book.Verify();
        Assert.True(report.Valid, report.Problem);
        Assert.Equal(2, Assert.Single(report.Recounts).Streams);
    }

    [Fact]
    public void Verify_replays_each_release_and_names_one_that_does_not_follow_its_guard()
    {
        // A writer that bypasses the guard (here: the store called directly with a made-up release) leaves a chain whose
        // hashes are all consistent; the replay of the Ladder (Blum & Hardt 2015, Alg. 1) still finds the look.
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(100));
        var ladder = GuardSpec.Ladder(0.05);
        book.RecordMany("validation", [Guarded(0, 0.40, ladder), Guarded(1, 0.38, ladder)]); // released 0.40, 0.40
        var good = book.Verify();
        Assert.True(good.Valid, good.Problem);
        Assert.Equal(2, good.Recounts[0].ReplayedReleases);

        var holdout = book.Holdout("validation");
        var forged = new NewLook("""{"i":2}""", 0.37, Adaptive: true, Release: new Released("ladder:0.05", 0.35, true, null) { Stream = "ladder:0.05", Index = 2, Answers = 3 });
        book.Store.AppendLooks(holdout, [forged]);
        var report = book.Verify();
        Assert.False(report.Valid);
        Assert.Equal(5, report.FirstBadEntry); // holdout, stream, two looks, then the forged one
        Assert.Equal("entry 5 (look 3) was released as 0.35 (from the holdout) on the guard stream 'ladder:0.05', but replaying ladder:0.05 from the stream's earlier releases gives 0.4 (from the holdout): the release does not follow its guard's rule", report.Problem);
    }

    [Fact]
    public void Verify_recounts_what_the_statement_counts()
    {
        using var book = _temp.Create();
        book.RegisterHoldout("validation", TempLedger.Examples(500));
        book.RegisterHoldout("other", TempLedger.Examples(50));
        for (var i = 0; i < 4; i++) book.Record("validation", $"{{\"fixed\":{i}}}", 0.3 - 0.01 * i);
        book.RecordMany("validation", [Guarded(10, 0.25, GuardSpec.Rounded(2)), Guarded(11, 0.24, GuardSpec.Ladder(0.02), stream: "a"), Guarded(12, 0.2, GuardSpec.Ladder(0.02), stream: "b")]);
        book.Record("validation", """{"peek":1}""", 0.21, adaptive: true); // shown exactly
        book.Record("other", "{}", 0.1);
        var report = book.Verify();
        Assert.True(report.Valid, report.Problem);
        var statement = book.Statement("validation");
        var recount = report.Recounts.Single(r => r.Holdout == "validation");
        Assert.Equal((statement.Looks, statement.AdaptiveLooks), (recount.Looks, recount.AdaptiveLooks));
        Assert.Equal(statement.LogEffectiveLooks, recount.LogEffectiveLooks, 12);
        Assert.Equal((3, 3), (recount.Streams, recount.ReplayedReleases));
        Assert.Equal(["validation", "other"], report.Recounts.Select(r => r.Holdout));
        Assert.Equal(Math.Log(1), report.Recounts[1].LogEffectiveLooks);
    }

    [Fact]
    public void A_schema_3_ledger_is_upgraded_and_its_older_guard_streams_continue()
    {
        // Looks written as schema 3 wrote them: a release without a stream (named by the guard's spelling), no declaration.
        string head;
        var ladder = GuardSpec.Ladder(0.02);
        var thresholdout = GuardSpec.Thresholdout(0.02, 0.0, 3); // σ = 0: its rule is deterministic, so the test knows each release
        using (var book = _temp.Create())
        {
            var holdout = book.RegisterHoldout("validation", TempLedger.Examples(100));
            book.Store.AppendLooks(holdout, [
                new NewLook("""{"i":0}""", 0.40, Adaptive: true, Release: new Released("ladder:0.02", 0.40, true, null)),
                new NewLook("""{"i":1}""", 0.34, Adaptive: true, Release: new Released("ladder:0.02", 0.34, true, null)),
                new NewLook("""{"i":2}""", 0.30, Adaptive: true, Release: new Released("thresholdout:0.02,0,3", 0.30, true, 0.20)),
                new NewLook("""{"i":3}""", 0.30, Adaptive: true, Release: new Released("thresholdout:0.02,0,3", 0.29, false, 0.29)),
            ]);
            head = book.Store.ChainHead()!;
        }

        if (_temp.Backend == Backend.Postgres)
        {
            PostgresServer.Execute("""
                DROP INDEX looks_by_stream; ALTER TABLE looks DROP COLUMN stream, DROP COLUMN stream_index, DROP COLUMN stream_answers;
                DROP TABLE guard_streams; UPDATE ledger_meta SET value = '3' WHERE key = 'schema_version';
                """, _temp.Location);
        }
        else
        {
            using var connection = new SqliteConnection($"Data Source={_temp.Path};Pooling=False");
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = AdaptiveLedgerTests.SchemaThreeSql;
            command.ExecuteNonQuery();
        }

        using var upgraded = _temp.Open();
        var before = upgraded.Verify(head);
        Assert.True(before.Valid, before.Problem);
        // The older Ladder releases are replayed; the older Thresholdout ones are taken as recorded (their noise was not kept).
        Assert.Equal((2, 2), (before.Recounts[0].ReplayedReleases, before.Recounts[0].UncheckedReleases));

        var next = upgraded.RecordMany("validation", [Guarded(4, 0.33, ladder), Guarded(5, 0.5, thresholdout, train: 0.1), Guarded(6, 0.5, thresholdout, train: 0.1), Guarded(7, 0.5, thresholdout, train: 0.1)]);
        Assert.Equal(0.34, next[0].Release!.Value); // 0.33 does not beat the older release 0.34 by more than 0.02
        Assert.Equal(2, next[0].Release!.Index);
        Assert.Equal([0.5, 0.5, null], next.Skip(1).Select(l => l.Release!.Value)); // one older holdout answer + two: the budget of 3 is spent
        Assert.Equal([2, 3, 4], next.Skip(1).Select(l => l.Release!.Index!.Value));
        var after = upgraded.Verify();
        Assert.True(after.Valid, after.Problem);
        Assert.Equal((6, 2), (after.Recounts[0].ReplayedReleases, after.Recounts[0].UncheckedReleases));
        Assert.Equal(upgraded.Statement("validation").LogEffectiveLooks, after.Recounts[0].LogEffectiveLooks, 12);
    }

    [Fact]
    public void Concurrent_writers_on_separate_connections_release_on_a_stream_in_chain_order()
    {
        // Four threads, each with its own connection, record 25 Ladder looks each on one stream; the releases must be what
        // the Ladder's rule gives for the looks in number order.
        using (var book = _temp.Create()) book.RegisterHoldout("validation", TempLedger.Examples(1000));
        var ladder = GuardSpec.Ladder(0.01);
        Parallel.For(0, 4, new ParallelOptions { MaxDegreeOfParallelism = 4 }, w =>
        {
            using var book = _temp.Open();
            for (var i = 0; i < 25; i++) book.RecordMany("validation", [Guarded(100 * w + i, Math.Round(0.5 - 0.004 * i - 0.001 * w, 3), ladder)]);
        });

        using var reader = _temp.Open();
        var looks = reader.Store.Looks(reader.Holdout("validation"));
        var state = GuardState.Empty;
        foreach (var look in looks)
        {
            var expected = Guard.Apply(ladder, state, look.Score, ValueSpace.ZeroOne(1000), higherIsBetter: false);
            Assert.Equal(expected.Value, look.Release!.Value);
            Assert.Equal(state.Releases, look.Release.Index);
            state = state.After(expected);
        }

        Assert.True(reader.Verify().Valid);
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
