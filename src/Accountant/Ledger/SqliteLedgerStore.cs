using System.Globalization;
using Accountant.Bounds;
using Microsoft.Data.Sqlite;

namespace Accountant.Ledger;

/// <summary>
/// The ledger in one SQLite file: WAL journal, a busy timeout, every write in a <c>BEGIN IMMEDIATE</c> transaction,
/// <c>PRAGMA user_version</c> for the schema version and <c>PRAGMA application_id</c> to recognise the file.
/// Tables hold typed rows; the <c>entries</c> table holds the chain, one row per holdout, look or void, and
/// <see cref="Verify"/> recomputes every hash from the typed rows, so an edit to any row breaks the chain.
/// Triggers refuse UPDATE and DELETE, so the append-only rule also holds against careless SQL.
/// </summary>
public sealed partial class SqliteLedgerStore : ILedgerStore
{
    /// <summary>The schema version this build writes (PRAGMA user_version).</summary>
    /// <remarks>Version 2 added how a look was released (guard, released value, holdout answered, training score);
    /// version 3 added openings of sealed test sets; version 4 added guard streams (declared in the chain with their guard
    /// and noise seed) and each guarded look's stream, index in it and the stream's holdout answers after it.</remarks>
    public const int SchemaVersion = 4;

    /// <summary>PRAGMA application_id: the bytes "ACNT".</summary>
    public const int ApplicationId = 0x41434E54;

    /// <summary>How long a writer waits for another writer's lock before giving up.</summary>
    public static readonly TimeSpan BusyTimeout = TimeSpan.FromSeconds(30);

    private readonly SqliteConnection _connection;
    private readonly TimeProvider _clock;
    private readonly TimeSpan _busyTimeout;

    private SqliteLedgerStore(string path, SqliteConnection connection, TimeProvider clock, TimeSpan busyTimeout)
    {
        Location = path;
        _connection = connection;
        _clock = clock;
        _busyTimeout = busyTimeout;
    }

    public string Location { get; }

    /// <summary>Creates a new, empty ledger; refuses if the file exists.</summary>
    public static SqliteLedgerStore Create(string path, TimeProvider? clock = null)
    {
        if (File.Exists(path))
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"a file already exists at '{path}'; choose another --ledger path or use the existing ledger.");
        }

        var directory = Path.GetDirectoryName(Path.GetFullPath(path));
        if (directory is not null && !Directory.Exists(directory))
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the folder '{directory}' does not exist; create it first or choose another --ledger path.");
        }

        // Built whole under a temporary name beside it, closed (which folds the write-ahead log into the file), then moved
        // into place in one step: a process killed while creating leaves no ledger at the path, never an empty or half-made
        // one that the next run would have to refuse.
        var building = Path.Combine(directory ?? ".", $".{Path.GetFileName(path)}.creating-{Guid.NewGuid():N}");
        try
        {
            using (Open(building, clock, create: true, shownAs: path))
            {
            }

            try
            {
                File.Move(building, path, overwrite: false);
            }
            catch (IOException) when (File.Exists(path))
            {
                // Another process put a ledger (or a file) there meanwhile: this one is not needed.
                throw new AccountantException(ErrorKind.LedgerUnusable, $"a file already exists at '{path}'; choose another --ledger path or use the existing ledger.");
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                throw new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{path}' could not be created ({e.Message.TrimEnd('.')}); check that its folder is writable.", e);
            }
        }
        finally
        {
            foreach (var leftover in new[] { building, building + "-wal", building + "-shm", building + "-journal" })
            {
                try { File.Delete(leftover); } catch (Exception e) when (e is IOException or UnauthorizedAccessException) { }
            }
        }

        return Open(path, clock);
    }

    /// <summary>Opens an existing ledger, or creates it when <paramref name="create"/> is set and the file is missing.</summary>
    /// <param name="busyTimeout">How long a write waits for another writer's lock (SQLite retries with growing pauses
    /// meanwhile) before it fails with a clear error; <see cref="BusyTimeout"/> unless given.</param>
    public static SqliteLedgerStore Open(string path, TimeProvider? clock = null, bool create = false, TimeSpan? busyTimeout = null) =>
        Open(path, clock, create, busyTimeout, shownAs: null);

    private static SqliteLedgerStore Open(string path, TimeProvider? clock, bool create, TimeSpan? busyTimeout = null, string? shownAs = null)
    {
        var timeout = busyTimeout ?? BusyTimeout;
        var exists = File.Exists(path);
        if (!exists && !create)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"there is no ledger at '{path}'; create one with 'accountant init --ledger {path}' or point --ledger (or ACCOUNTANT_LEDGER) at an existing one.");
        }

        if (exists && new FileInfo(path).Length > 0 && !HasSqliteHeader(path))
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"'{path}' is not an Accountant ledger (not a SQLite file); point --ledger at a ledger made by 'accountant init'.");
        }

        var builder = new SqliteConnectionStringBuilder
        {
            DataSource = path,
            Mode = create ? SqliteOpenMode.ReadWriteCreate : SqliteOpenMode.ReadWrite,
            Pooling = false,
            DefaultTimeout = Math.Max(1, (int)Math.Ceiling(timeout.TotalSeconds)),
        };
        var connection = new SqliteConnection(builder.ConnectionString);
        try
        {
            connection.Open();
            Execute(connection, $"PRAGMA busy_timeout = {(int)timeout.TotalMilliseconds};");
            var store = new SqliteLedgerStore(path, connection, clock ?? TimeProvider.System, timeout);
            store.Prepare(allowInitialize: create);
            return store;
        }
        catch (SqliteException e)
        {
            connection.Dispose();
            throw Translate(e, shownAs ?? path, timeout);
        }
        catch
        {
            connection.Dispose();
            throw;
        }
    }

    private static bool HasSqliteHeader(string path)
    {
        try
        {
            using var stream = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.ReadWrite | FileShare.Delete);
            var header = new byte[16];
            var read = stream.Read(header, 0, header.Length);
            return read == 16 && header.AsSpan().SequenceEqual("SQLite format 3\0"u8);
        }
        catch (IOException)
        {
            return true; // Let SQLite report what it finds.
        }
        catch (UnauthorizedAccessException e)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{path}' cannot be read ({e.Message}); check its permissions.");
        }
    }

    private void Prepare(bool allowInitialize)
    {
        var version = Convert.ToInt32(Scalar("PRAGMA user_version;"), CultureInfo.InvariantCulture);
        var application = Convert.ToInt32(Scalar("PRAGMA application_id;"), CultureInfo.InvariantCulture);
        var tables = Convert.ToInt64(Scalar("SELECT count(*) FROM sqlite_master;"), CultureInfo.InvariantCulture);

        if (version == 0 && application == 0 && tables == 0)
        {
            if (!allowInitialize)
            {
                throw new AccountantException(ErrorKind.LedgerUnusable, $"'{Location}' is an empty file, not an Accountant ledger; remove it and run 'accountant init --ledger {Location}'.");
            }

            Initialize();
            return;
        }

        if (application != ApplicationId)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"'{Location}' is a SQLite database but not an Accountant ledger; point --ledger at a ledger made by 'accountant init'.");
        }

        if (version > SchemaVersion)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{Location}' has schema version {version}, newer than the {SchemaVersion} this accountant understands; upgrade the accountant tool to read it (nothing was changed).");
        }

        if (version < 1)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{Location}' has an unknown schema version {version}; it was not made by a released accountant.");
        }

        TryWal();
        if (version < SchemaVersion)
        {
            Upgrade(version);
        }

        // Only a ledger made before the index existed needs it built; asking first keeps every other open read-only.
        if (Convert.ToInt64(Scalar("SELECT count(*) FROM sqlite_master WHERE type = 'index' AND name = 'looks_by_score';"), CultureInfo.InvariantCulture) == 0)
        {
            try
            {
                Execute(_connection, TallyIndex);
            }
            catch (SqliteException e) when (e.SqliteErrorCode is 8 /* READONLY */ or 5 or 6 /* BUSY, LOCKED */)
            {
                // A read-only or busy ledger is still read correctly without the index, only more slowly.
            }
        }
    }

    /// <summary>
    /// A covering index for <see cref="Tally"/>: a statement counts a million looks from it and finds the best one without
    /// reading the looks table. It holds no data of its own, so it is not part of the chain or the schema version; a
    /// ledger made before it existed gets it the first time it is opened writable.
    /// </summary>
    private const string TallyIndex = "CREATE INDEX IF NOT EXISTS looks_by_score ON looks (holdout_id, score, number, adaptive, loss_encoding);";

    private void TryWal()
    {
        try
        {
            Execute(_connection, "PRAGMA journal_mode = WAL;");
        }
        catch (SqliteException e) when (e.SqliteErrorCode is 8 /* READONLY */)
        {
            // A read-only ledger can still be read; writes will report the problem.
        }
    }

    /// <summary>
    /// Upgrades an older ledger in place, in one transaction. Columns are only added, never changed, and the canonical
    /// form of old entries is unchanged, so the chain verifies as before.
    /// </summary>
    private void Upgrade(int from)
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        var current = Convert.ToInt32(Scalar("PRAGMA user_version;"), CultureInfo.InvariantCulture);
        if (current == from)
        {
            if (current < 2) Execute(_connection, V2Columns);
            if (current < 3) Execute(_connection, V3Openings);
            if (current < 4) Execute(_connection, V4Streams);
            Execute(_connection, $"PRAGMA user_version = {SchemaVersion};");
        }

        transaction.Commit();
    }

    private const string V2Columns = """
        ALTER TABLE looks ADD COLUMN guard TEXT;
        ALTER TABLE looks ADD COLUMN released REAL;
        ALTER TABLE looks ADD COLUMN holdout_answered INTEGER;
        ALTER TABLE looks ADD COLUMN train_score REAL;
        """;

    private const string V3Openings = """
        CREATE TABLE openings (
            seq              INTEGER PRIMARY KEY,
            holdout_id       INTEGER NOT NULL,
            look_number      INTEGER NOT NULL,
            test_size        INTEGER NOT NULL,
            test_fingerprint TEXT NOT NULL,
            test_score       REAL NOT NULL,
            recorded_at      TEXT NOT NULL
        );
        CREATE TRIGGER openings_no_update BEFORE UPDATE ON openings BEGIN SELECT RAISE(ABORT, 'the ledger is append-only'); END;
        CREATE TRIGGER openings_no_delete BEFORE DELETE ON openings BEGIN SELECT RAISE(ABORT, 'the ledger is append-only'); END;
        """;

    /// <summary>
    /// Schema 4: guard streams. A stream is declared by an entry of its own before its first look; every look released on it
    /// records the stream, its index in it and the stream's holdout answers so far, so a writer reads a stream's state from
    /// its latest look (one lookup in <c>looks_by_stream</c>) inside its write transaction.
    /// </summary>
    internal const string V4Streams = """
        CREATE TABLE guard_streams (
            seq         INTEGER PRIMARY KEY,
            holdout_id  INTEGER NOT NULL,
            name        TEXT NOT NULL,
            guard       TEXT NOT NULL,
            seed        INTEGER,
            created_at  TEXT NOT NULL,
            UNIQUE (holdout_id, name)
        );
        CREATE TRIGGER guard_streams_no_update BEFORE UPDATE ON guard_streams BEGIN SELECT RAISE(ABORT, 'the ledger is append-only'); END;
        CREATE TRIGGER guard_streams_no_delete BEFORE DELETE ON guard_streams BEGIN SELECT RAISE(ABORT, 'the ledger is append-only'); END;
        ALTER TABLE looks ADD COLUMN stream TEXT;
        ALTER TABLE looks ADD COLUMN stream_index INTEGER;
        ALTER TABLE looks ADD COLUMN stream_answers INTEGER;
        CREATE INDEX looks_by_stream ON looks (holdout_id, stream, number) WHERE stream IS NOT NULL;
        """;

    private void Initialize()
    {
        Execute(_connection, "PRAGMA journal_mode = WAL;");
        using var transaction = _connection.BeginTransaction(deferred: false);
        Execute(_connection, $"""
            PRAGMA application_id = {ApplicationId};
            PRAGMA user_version = 1;
            CREATE TABLE entries (
                seq       INTEGER PRIMARY KEY,
                kind      TEXT NOT NULL,
                prev_hash BLOB NOT NULL,
                hash      BLOB NOT NULL
            );
            CREATE TABLE holdouts (
                id          INTEGER PRIMARY KEY,
                seq         INTEGER NOT NULL UNIQUE,
                name        TEXT NOT NULL UNIQUE,
                size        INTEGER NOT NULL,
                metric      TEXT NOT NULL,
                loss_low    REAL NOT NULL,
                loss_high   REAL NOT NULL,
                fingerprint TEXT NOT NULL,
                ids         BLOB NOT NULL,
                labels      BLOB NOT NULL,
                created_at  TEXT NOT NULL
            );
            CREATE TABLE looks (
                seq                  INTEGER PRIMARY KEY,
                holdout_id           INTEGER NOT NULL,
                number               INTEGER NOT NULL,
                configuration        TEXT NOT NULL,
                configuration_digest TEXT NOT NULL,
                score                REAL NOT NULL,
                adaptive             INTEGER NOT NULL,
                loss_encoding        INTEGER NOT NULL,
                losses               BLOB,
                search               TEXT,
                stage                TEXT,
                seconds              REAL,
                recorded_at          TEXT NOT NULL,
                UNIQUE (holdout_id, number)
            );
            CREATE TABLE voids (
                seq         INTEGER PRIMARY KEY,
                holdout_id  INTEGER NOT NULL,
                look_number INTEGER NOT NULL,
                reason      TEXT NOT NULL,
                recorded_at TEXT NOT NULL
            );
            """);
        Execute(_connection, TallyIndex);
        foreach (var table in new[] { "entries", "holdouts", "looks", "voids" })
        {
            Execute(_connection, $"""
                CREATE TRIGGER {table}_no_update BEFORE UPDATE ON {table} BEGIN SELECT RAISE(ABORT, 'the ledger is append-only'); END;
                CREATE TRIGGER {table}_no_delete BEFORE DELETE ON {table} BEGIN SELECT RAISE(ABORT, 'the ledger is append-only'); END;
                """);
        }

        // A new ledger is built as version 1 and then taken through every upgrade, so new and upgraded ledgers are alike.
        Execute(_connection, V2Columns + V3Openings + V4Streams + $"PRAGMA user_version = {SchemaVersion};");
        transaction.Commit();
    }

    public Holdout AddHoldout(string name, Metric metric, LossRange range, IReadOnlyList<HoldoutExample> sortedExamples) => Guarded(() =>
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        if (FindHoldout(name) is not null)
        {
            throw AccountantException.BadInput($"a holdout named '{name}' is already registered; choose another name (a holdout cannot be replaced).");
        }

        var fingerprint = Fingerprint.Compute(sortedExamples);
        var ids = Fingerprint.PackStrings(sortedExamples.Select(e => e.Id));
        var labels = Fingerprint.PackStrings(sortedExamples.Select(e => e.Label));
        var created = Chain.Timestamp(_clock.GetUtcNow());
        var (sequence, previous) = Tail();
        var canonical = Chain.HoldoutEntry(sequence, name, sortedExamples.Count, metric, range.Low, range.High, fingerprint, ids, labels, created);
        InsertEntry(sequence, "holdout", previous, Chain.Link(previous, canonical));
        using (var command = Command("""
            INSERT INTO holdouts (seq, name, size, metric, loss_low, loss_high, fingerprint, ids, labels, created_at)
            VALUES ($seq, $name, $size, $metric, $low, $high, $fingerprint, $ids, $labels, $created);
            """))
        {
            command.Parameters.AddWithValue("$seq", sequence);
            command.Parameters.AddWithValue("$name", name);
            command.Parameters.AddWithValue("$size", sortedExamples.Count);
            command.Parameters.AddWithValue("$metric", metric.Name());
            command.Parameters.AddWithValue("$low", range.Low);
            command.Parameters.AddWithValue("$high", range.High);
            command.Parameters.AddWithValue("$fingerprint", fingerprint);
            command.Parameters.AddWithValue("$ids", ids);
            command.Parameters.AddWithValue("$labels", labels);
            command.Parameters.AddWithValue("$created", created);
            command.ExecuteNonQuery();
        }

        transaction.Commit();
        return FindHoldout(name)!;
    });

    public Holdout? FindHoldout(string name) => Guarded(() => LedgerReads.FindHoldout(_connection, name));

    public IReadOnlyList<Holdout> Holdouts() => Guarded(() => LedgerReads.Holdouts(_connection));

    public IReadOnlyList<HoldoutExample> Examples(Holdout holdout) => Guarded(() => LedgerReads.Examples(_connection, holdout));

    public IReadOnlyList<Look> AppendLooks(Holdout holdout, Func<IReadOnlyList<NewLook>> looks) => Guarded(() =>
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        var written = AppendLooksInTransaction(holdout, looks());
        transaction.Commit();
        return written;
    });

    public GuardStreamState? FindGuardStream(Holdout holdout, string name) => Guarded(() => LedgerReads.FindGuardStream(_connection, holdout, name));

    /// <summary>Declares the streams the looks open, each an entry of its own, in the caller's write transaction.</summary>
    private void OpenStreams(Holdout holdout, IReadOnlyList<NewLook> looks)
    {
        foreach (var open in LedgerReads.StreamsOpened(looks))
        {
            var created = Chain.Timestamp(_clock.GetUtcNow());
            var (sequence, previous) = Tail();
            var canonical = Chain.StreamEntry(sequence, holdout.Fingerprint, open.Name, open.Guard.ToString(), open.Seed, created);
            InsertEntry(sequence, "stream", previous, Chain.Link(previous, canonical));
            using var command = Command("INSERT INTO guard_streams (seq, holdout_id, name, guard, seed, created_at) VALUES ($seq, $id, $name, $guard, $seed, $created);");
            command.Parameters.AddWithValue("$seq", sequence);
            command.Parameters.AddWithValue("$id", holdout.Key);
            command.Parameters.AddWithValue("$name", open.Name);
            command.Parameters.AddWithValue("$guard", open.Guard.ToString());
            command.Parameters.AddWithValue("$seed", open.Seed is { } seed ? unchecked((long)seed) : DBNull.Value);
            command.Parameters.AddWithValue("$created", created);
            command.ExecuteNonQuery();
        }
    }

    /// <summary>The work of <see cref="AppendLooks(Holdout, Func{IReadOnlyList{NewLook}})"/> inside a write transaction the caller began and will commit.</summary>
    private List<Look> AppendLooksInTransaction(Holdout holdout, IReadOnlyList<NewLook> looks)
    {
        OpenStreams(holdout, looks);
        var number = Convert.ToInt32(ScalarWith("SELECT COALESCE(MAX(number), 0) FROM looks WHERE holdout_id = $id;", ("$id", holdout.Key)), CultureInfo.InvariantCulture);
        var (sequence, previous) = Tail();
        var recorded = Chain.Timestamp(_clock.GetUtcNow());
        var recordedAt = Chain.ParseTimestamp(recorded);
        var written = new List<Look>(looks.Count);
        using var insert = Command("""
            INSERT INTO looks (seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, search, stage, seconds, recorded_at,
                               guard, released, holdout_answered, train_score, stream, stream_index, stream_answers)
            VALUES ($seq, $holdout, $number, $configuration, $digest, $score, $adaptive, $encoding, $losses, $search, $stage, $seconds, $recorded,
                    $guard, $released, $answered, $train, $stream, $index, $answers);
            """);
        // Bound with their column's own type, so SQLite stores them without converting text to numbers.
        // (Names and types in two arrays rather than tuples: no generic code over a tuple is compiled at run time for one record.)
        string[] names = ["$seq", "$holdout", "$number", "$configuration", "$digest", "$score", "$adaptive", "$encoding", "$losses", "$search", "$stage", "$seconds", "$recorded",
            "$guard", "$released", "$answered", "$train", "$stream", "$index", "$answers"];
        SqliteType[] types = [SqliteType.Integer, SqliteType.Integer, SqliteType.Integer, SqliteType.Text, SqliteType.Text, SqliteType.Real, SqliteType.Integer, SqliteType.Integer,
            SqliteType.Blob, SqliteType.Text, SqliteType.Text, SqliteType.Real, SqliteType.Text, SqliteType.Text, SqliteType.Real, SqliteType.Integer, SqliteType.Real,
            SqliteType.Text, SqliteType.Integer, SqliteType.Integer];
        var parameters = new SqliteParameter[names.Length];
        for (var p = 0; p < names.Length; p++) parameters[p] = insert.Parameters.Add(names[p], types[p]);
        insert.Prepare();
        // A look without search, stage, seconds or release leaves those columns NULL; binding eight NULLs per look
        // costs about as much as the rest of its row, so such looks go through a statement that names only the others.
        using var plain = Command("""
            INSERT INTO looks (seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, recorded_at)
            VALUES ($seq, $holdout, $number, $configuration, $digest, $score, $adaptive, $encoding, $losses, $recorded);
            """);
        var plainParameters = parameters.Where(p => p.ParameterName is not ("$search" or "$stage" or "$seconds" or "$guard" or "$released" or "$answered" or "$train" or "$stream" or "$index" or "$answers"))
            .Select(p => plain.Parameters.Add(p.ParameterName, p.SqliteType)).ToArray();
        plain.Prepare();
        using var entry = Command("INSERT INTO entries (seq, kind, prev_hash, hash) VALUES ($seq, 'look', $prev, $hash);");
        var (entrySeq, entryPrev, entryHash) = (entry.Parameters.Add("$seq", SqliteType.Integer), entry.Parameters.Add("$prev", SqliteType.Blob), entry.Parameters.Add("$hash", SqliteType.Blob));
        entry.Prepare();
        var (firstSequence, firstNumber) = (sequence, number + 1);
        using var chain = new LookChain(looks, previous, (i, digest) =>
        {
            var look = looks[i];
            return Chain.LookEntry(firstSequence + i, holdout.Fingerprint, firstNumber + i, look.Configuration, digest, look.Score, look.Adaptive,
                look.LossEncoding, look.Losses, look.Search, look.Stage, look.Seconds, recorded, look.Release);
        });
        for (var i = 0; i < looks.Count; i++)
        {
            var look = looks[i];
            number++;
            var (digest, hash) = chain.Take(i);
            entrySeq.Value = sequence;
            entryPrev.Value = previous;
            entryHash.Value = hash;
            entry.ExecuteNonQuery();

            var isPlain = look is { Search: null, Stage: null, Seconds: null, Release: null };
            var bound = isPlain ? plainParameters : parameters;
            bound[0].Value = sequence;
            bound[1].Value = holdout.Key;
            bound[2].Value = number;
            bound[3].Value = look.Configuration;
            bound[4].Value = digest;
            bound[5].Value = look.Score;
            bound[6].Value = look.Adaptive ? 1 : 0;
            bound[7].Value = (int)look.LossEncoding;
            bound[8].Value = (object?)look.Losses ?? DBNull.Value;
            if (isPlain)
            {
                bound[9].Value = recorded;
                plain.ExecuteNonQuery();
            }
            else
            {
                parameters[9].Value = (object?)look.Search ?? DBNull.Value;
                parameters[10].Value = (object?)look.Stage ?? DBNull.Value;
                parameters[11].Value = (object?)look.Seconds ?? DBNull.Value;
                parameters[12].Value = recorded;
                parameters[13].Value = (object?)look.Release?.Guard ?? DBNull.Value;
                parameters[14].SqliteType = SqliteType.Real;
                parameters[14].Value = (object?)look.Release?.Value ?? DBNull.Value;
                parameters[15].SqliteType = SqliteType.Integer;
                parameters[15].Value = look.Release is { } r ? (r.HoldoutAnswered ? 1 : 0) : DBNull.Value;
                parameters[16].SqliteType = SqliteType.Real;
                parameters[16].Value = (object?)look.Release?.TrainScore ?? DBNull.Value;
                parameters[17].Value = (object?)look.Release?.Stream ?? DBNull.Value;
                parameters[18].SqliteType = SqliteType.Integer;
                parameters[18].Value = (object?)look.Release?.Index ?? DBNull.Value;
                parameters[19].SqliteType = SqliteType.Integer;
                parameters[19].Value = (object?)look.Release?.Answers ?? DBNull.Value;
                insert.ExecuteNonQuery();
            }

            written.Add(new Look(sequence, number, look.Configuration, digest, look.Score, look.LossEncoding, look.Search, look.Stage, look.Adaptive, recordedAt, look.Seconds, look.Release));
            previous = hash;
            sequence++;
        }

        return written;
    }

    public LookVoid AppendVoid(Holdout holdout, int lookNumber, string reason) => Guarded(() =>
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        if (!LedgerReads.LookExists(_connection, holdout, lookNumber))
        {
            throw AccountantException.BadArguments($"holdout '{holdout.Name}' has no look {lookNumber}; 'accountant statement {holdout.Name}' lists how many looks it has.");
        }

        var recorded = Chain.Timestamp(_clock.GetUtcNow());
        var (sequence, previous) = Tail();
        var canonical = Chain.VoidEntry(sequence, holdout.Fingerprint, lookNumber, reason, recorded);
        InsertEntry(sequence, "void", previous, Chain.Link(previous, canonical));
        using (var command = Command("INSERT INTO voids (seq, holdout_id, look_number, reason, recorded_at) VALUES ($seq, $id, $number, $reason, $recorded);"))
        {
            command.Parameters.AddWithValue("$seq", sequence);
            command.Parameters.AddWithValue("$id", holdout.Key);
            command.Parameters.AddWithValue("$number", lookNumber);
            command.Parameters.AddWithValue("$reason", reason);
            command.Parameters.AddWithValue("$recorded", recorded);
            command.ExecuteNonQuery();
        }

        transaction.Commit();
        return new LookVoid(sequence, lookNumber, reason, Chain.ParseTimestamp(recorded));
    });

    public TestOpening AppendOpening(Holdout holdout, int lookNumber, int testSize, string testFingerprint, double testScore) => Guarded(() =>
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        if (!LedgerReads.LookExists(_connection, holdout, lookNumber))
        {
            throw AccountantException.BadArguments($"holdout '{holdout.Name}' has no look {lookNumber} to open the test set for.");
        }

        var recorded = Chain.Timestamp(_clock.GetUtcNow());
        var (sequence, previous) = Tail();
        var canonical = Chain.OpeningEntry(sequence, holdout.Fingerprint, lookNumber, testSize, testFingerprint, testScore, recorded);
        InsertEntry(sequence, "opening", previous, Chain.Link(previous, canonical));
        using (var command = Command("INSERT INTO openings (seq, holdout_id, look_number, test_size, test_fingerprint, test_score, recorded_at) VALUES ($seq, $id, $look, $size, $fingerprint, $score, $recorded);"))
        {
            command.Parameters.AddWithValue("$seq", sequence);
            command.Parameters.AddWithValue("$id", holdout.Key);
            command.Parameters.AddWithValue("$look", lookNumber);
            command.Parameters.AddWithValue("$size", testSize);
            command.Parameters.AddWithValue("$fingerprint", testFingerprint);
            command.Parameters.AddWithValue("$score", testScore);
            command.Parameters.AddWithValue("$recorded", recorded);
            command.ExecuteNonQuery();
        }

        transaction.Commit();
        return new TestOpening(sequence, lookNumber, testSize, testFingerprint, testScore, Chain.ParseTimestamp(recorded));
    });

    public IReadOnlyList<TestOpening> Openings(Holdout holdout) => Guarded(() => LedgerReads.Openings(_connection, holdout));

    public IReadOnlyList<Look> Looks(Holdout holdout) => Guarded(() => LedgerReads.Looks(_connection, holdout));

    /// <summary>The tally of <see cref="LedgerReads.Tally"/>, in one read transaction (a deferred transaction sees one state of the WAL).</summary>
    public Statements.LookTally Tally(Holdout holdout, IReadOnlySet<int> voided) => Guarded(() =>
    {
        using var snapshot = _connection.BeginTransaction(deferred: true);
        return LedgerReads.Tally(_connection, holdout, voided);
    });

    public IReadOnlyList<LookVoid> Voids(Holdout holdout) => Guarded(() => LedgerReads.Voids(_connection, holdout));

    public byte[]? LossBytes(Holdout holdout, int lookNumber) => Guarded(() => LedgerReads.LossBytes(_connection, holdout, lookNumber));

    public IEnumerable<LossRow> LossRows(Holdout holdout)
    {
        using var rows = Guarded(() => LedgerReads.LossRows(_connection, holdout).GetEnumerator());
        while (Guarded(rows.MoveNext)) yield return rows.Current;
    }

    public string? ChainHead() => Guarded(() => LedgerReads.ChainHead(_connection));

    public ChainReport Verify(string? expectedHead = null) => Guarded(() => new ChainVerifier(Rows()).Run(expectedHead));

    /// <summary>The stored rows, read from one snapshot (a deferred transaction sees one state of the WAL).</summary>
    public ILedgerRows Rows() => new DbLedgerRows(_connection, () => _connection.BeginTransaction(deferred: true));

    public ChainReport Import(ILedgerRows source, string? expectedHead) => Guarded(() =>
    {
        using var transaction = _connection.BeginTransaction(deferred: false);
        if (Convert.ToInt64(Scalar("SELECT count(*) FROM entries;"), CultureInfo.InvariantCulture) != 0)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{Location}' is not empty; copy into a new ledger file.");
        }

        var report = LedgerCopy.Write(_connection, transaction, source, expectedHead);
        transaction.Commit();
        return report;
    });

    private (long Sequence, byte[] Previous) Tail() => LedgerReads.Tail(_connection);

    private SqliteCommand EntryInsertCommand()
    {
        var command = Command("INSERT INTO entries (seq, kind, prev_hash, hash) VALUES ($seq, $kind, $prev, $hash);");
        command.Parameters.Add("$seq", SqliteType.Integer);
        command.Parameters.Add("$kind", SqliteType.Text);
        command.Parameters.Add("$prev", SqliteType.Blob);
        command.Parameters.Add("$hash", SqliteType.Blob);
        command.Prepare();
        return command;
    }

    private void InsertEntry(long sequence, string kind, byte[] previous, byte[] hash)
    {
        using var command = EntryInsertCommand();
        command.Parameters["$seq"].Value = sequence;
        command.Parameters["$kind"].Value = kind;
        command.Parameters["$prev"].Value = previous;
        command.Parameters["$hash"].Value = hash;
        command.ExecuteNonQuery();
    }

    private SqliteCommand Command(string sql)
    {
        var command = _connection.CreateCommand();
        command.CommandText = sql;
        return command;
    }

    private object? Scalar(string sql)
    {
        using var command = Command(sql);
        return command.ExecuteScalar();
    }

    private object? ScalarWith(string sql, params (string Name, object Value)[] parameters)
    {
        using var command = Command(sql);
        foreach (var (name, value) in parameters) command.Parameters.AddWithValue(name, value);
        return command.ExecuteScalar();
    }

    private static void Execute(SqliteConnection connection, string sql)
    {
        using var command = connection.CreateCommand();
        command.CommandText = sql;
        command.ExecuteNonQuery();
    }

    private T Guarded<T>(Func<T> action)
    {
        try
        {
            return action();
        }
        catch (SqliteException e)
        {
            throw Translate(e, Location, _busyTimeout);
        }
        catch (Exception e) when (e is InvalidCastException or FormatException or OverflowException)
        {
            throw new AccountantException(ErrorKind.Integrity, $"the ledger '{Location}' holds a damaged row ({e.Message.TrimEnd('.')}); run 'accountant verify' to find the first bad entry.", e);
        }
    }

    /// <summary>Turns SQLite's result codes into errors that say what to do.</summary>
    internal static AccountantException Translate(SqliteException e, string path, TimeSpan? busyTimeout = null) => e.SqliteErrorCode switch
    {
        5 or 6 => new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{path}' stayed locked by another writer for more than {(busyTimeout ?? BusyTimeout).TotalSeconds:0.#} s; retry when the other process has finished (nothing was written).", e),
        8 => new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{path}' is read-only; make the file and its folder writable, or point --ledger at a writable copy (nothing was written).", e),
        13 => new AccountantException(ErrorKind.LedgerUnusable, $"the disk holding the ledger '{path}' is full; free space and retry (nothing was written).", e),
        // A full disk can also surface as an I/O error (growing the WAL index or the journal); say which when the disk is full.
        10 when DiskFull(path) => new AccountantException(ErrorKind.LedgerUnusable, $"the disk holding the ledger '{path}' is full; free space and retry (nothing was written).", e),
        10 => new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{path}' could not be read or written (a disk I/O error, SQLite code {e.SqliteExtendedErrorCode}); check the disk and retry (nothing was written).", e),
        11 => new AccountantException(ErrorKind.Integrity, $"the ledger '{path}' is damaged at the SQLite level ({e.Message}); restore it from a copy and run 'accountant verify'.", e),
        26 => new AccountantException(ErrorKind.LedgerUnusable, $"'{path}' is not an Accountant ledger (not a SQLite database); point --ledger at a ledger made by 'accountant init'.", e),
        14 => new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{path}' cannot be opened ({e.Message.TrimEnd('.')}); check that the path and its folder exist and are accessible.", e),
        19 when e.Message.Contains("append-only", StringComparison.Ordinal) => new AccountantException(ErrorKind.Integrity, "the ledger is append-only: entries cannot be changed or removed (void a look instead).", e),
        _ => new AccountantException(ErrorKind.LedgerUnusable, $"the ledger '{path}' could not be used: {e.Message.TrimEnd('.')} (SQLite code {e.SqliteErrorCode}); nothing was written.", e),
    };

    /// <summary>Whether the file system holding <paramref name="path"/> has (almost) no space left.</summary>
    private static bool DiskFull(string path)
    {
        try
        {
            var folder = Path.GetDirectoryName(Path.GetFullPath(path)) ?? ".";
            return new DriveInfo(folder).AvailableFreeSpace < 64 * 1024;
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or ArgumentException)
        {
            return false;
        }
    }

    public void Dispose() => _connection.Dispose();
}
