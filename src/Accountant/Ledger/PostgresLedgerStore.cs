using System.Globalization;
using System.Net.Sockets;
using Accountant.Bounds;
using Npgsql;
using NpgsqlTypes;

namespace Accountant.Ledger;

/// <summary>
/// The ledger in a PostgreSQL database (in the first schema of the connection's search path), for a team whose workers
/// run on many machines. It keeps the SQLite ledger's semantics exactly: the same tables and columns, the same chain
/// bytes from <see cref="Chain"/>, verified by the same <see cref="ChainVerifier"/>, append-only by triggers (UPDATE,
/// DELETE and TRUNCATE raise). Every write is one transaction that first takes <c>LOCK TABLE entries IN EXCLUSIVE
/// MODE</c>, a lock held until commit or rollback, so appends are serialized by the server (readers are not blocked)
/// and look numbers stay gapless under any number of concurrent writers.
/// </summary>
public sealed partial class PostgresLedgerStore : ILedgerStore
{
    /// <summary>The schema version this build writes; kept in the <c>ledger_meta</c> table. Same numbering as SQLite.</summary>
    public const int SchemaVersion = SqliteLedgerStore.SchemaVersion;

    /// <summary>The value of <c>ledger_meta.application</c> that marks a schema as an Accountant ledger.</summary>
    public const string Application = "accountant-ledger";

    private readonly NpgsqlConnection _connection;
    private readonly TimeProvider _clock;
    private readonly TimeSpan _lockTimeout;
    private readonly LedgerLocation _location;

    private PostgresLedgerStore(LedgerLocation location, NpgsqlConnection connection, TimeProvider clock, TimeSpan lockTimeout)
    {
        _location = location;
        _connection = connection;
        _clock = clock;
        _lockTimeout = lockTimeout;
    }

    public string Location => _location.Display;

    /// <summary>Creates a new ledger; refuses when the schema already holds one (or other tables).</summary>
    public static PostgresLedgerStore Create(LedgerLocation location, TimeProvider? clock = null, TimeSpan? lockTimeout = null) =>
        Open(location, clock, create: true, mustBeNew: true, lockTimeout);

    /// <summary>Opens an existing ledger, or creates one when <paramref name="create"/> is set and the schema has none.</summary>
    public static PostgresLedgerStore Open(LedgerLocation location, TimeProvider? clock = null, bool create = false, bool mustBeNew = false, TimeSpan? lockTimeout = null)
    {
        var settings = location.Postgres ?? throw new ArgumentException("not a PostgreSQL location", nameof(location));
        var timeout = lockTimeout ?? SqliteLedgerStore.BusyTimeout;
        var builder = new NpgsqlConnectionStringBuilder(settings.ConnectionString);
        if (builder.CommandTimeout <= 30) builder.CommandTimeout = 300;
        var connection = new NpgsqlConnection(builder.ConnectionString);
        try
        {
            connection.Open();
            var store = new PostgresLedgerStore(location, connection, clock ?? TimeProvider.System, timeout);
            store.Prepare(create, mustBeNew, builder.SearchPath);
            return store;
        }
        catch (Exception e) when (e is NpgsqlException or TimeoutException or SocketException)
        {
            connection.Dispose();
            throw Translate(e, location.Display, timeout);
        }
        catch
        {
            connection.Dispose();
            throw;
        }
    }

    private void Prepare(bool create, bool mustBeNew, string? searchPath)
    {
        var schema = Scalar("SELECT current_schema();") as string;
        var isLedger = schema is not null && Scalar("SELECT to_regclass('ledger_meta') IS NOT NULL;") is true;
        if (!isLedger)
        {
            var tables = schema is null ? 0L : Convert.ToInt64(Scalar("SELECT count(*) FROM pg_tables WHERE schemaname = current_schema();"), CultureInfo.InvariantCulture);
            if (tables > 0)
            {
                throw new AccountantException(ErrorKind.LedgerUnusable, $"the PostgreSQL schema at {Location} holds tables but no Accountant ledger; point --ledger at an empty schema (add ?schema=NAME) or at a ledger made by 'accountant init'.");
            }

            if (!create)
            {
                throw new AccountantException(ErrorKind.LedgerUnusable, $"there is no ledger at {Location}; create one with 'accountant init --ledger ADDRESS' or point --ledger (or ACCOUNTANT_LEDGER) at an existing one.");
            }

            Initialize(searchPath);
            return;
        }

        if (mustBeNew)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"a ledger already exists at {Location}; use it, or choose another database or schema for a new one.");
        }

        var application = Scalar("SELECT value FROM ledger_meta WHERE key = 'application';") as string;
        if (application != Application)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the PostgreSQL schema at {Location} is not an Accountant ledger; point --ledger at a ledger made by 'accountant init'.");
        }

        var versionText = Scalar("SELECT value FROM ledger_meta WHERE key = 'schema_version';") as string;
        if (!int.TryParse(versionText, NumberStyles.None, CultureInfo.InvariantCulture, out var version) || version < 1)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the ledger at {Location} has an unknown schema version '{versionText}'; it was not made by a released accountant.");
        }

        if (version > SchemaVersion)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the ledger at {Location} has schema version {version}, newer than the {SchemaVersion} this accountant understands; upgrade the accountant tool to read it (nothing was changed).");
        }

        if (version < SchemaVersion) Upgrade(version);
    }

    /// <summary>
    /// Builds the tables in one transaction. A transaction-level advisory lock makes two simultaneous <c>init</c>s
    /// take turns; the second then finds the ledger the first made.
    /// </summary>
    private void Initialize(string? searchPath)
    {
        using var transaction = _connection.BeginTransaction();
        Execute("SELECT pg_advisory_xact_lock(4702018331);"); // any fixed key: "ACNT" in a number
        var schema = searchPath?.Split(',')[0].Trim().Trim('"');
        if (!string.IsNullOrEmpty(schema) && !schema.StartsWith('$'))
        {
            Execute($"CREATE SCHEMA IF NOT EXISTS {Quote(schema)};");
        }

        if (Scalar("SELECT to_regclass('ledger_meta') IS NOT NULL;") is true)
        {
            transaction.Rollback();
            return; // Another process made it meanwhile; open it as it is.
        }

        Execute(Ddl + GuardStreamsDdl);
        foreach (var table in new[] { "entries", "holdouts", "looks", "voids", "openings", "guard_streams" }) AppendOnly(table);

        using (var meta = Command("INSERT INTO ledger_meta (key, value) VALUES ('application', @application), ('schema_version', @version);"))
        {
            meta.Parameters.AddWithValue("application", Application);
            meta.Parameters.AddWithValue("version", SchemaVersion.ToString(CultureInfo.InvariantCulture));
            meta.ExecuteNonQuery();
        }

        transaction.Commit();
    }

    private void AppendOnly(string table) => Execute($"""
        CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON {table} FOR EACH ROW EXECUTE FUNCTION ledger_append_only();
        CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON {table} FOR EACH STATEMENT EXECUTE FUNCTION ledger_append_only();
        """);

    /// <summary>
    /// Upgrades a ledger of an older schema in place, in one transaction holding the chain lock (so no writer appends
    /// meanwhile). Tables and columns are only added; old entries keep their canonical form, so the chain verifies as before.
    /// Schema 4 added guard streams (see <see cref="SqliteLedgerStore.SchemaVersion"/>).
    /// </summary>
    private void Upgrade(int from)
    {
        using var transaction = BeginWrite();
        var current = int.Parse((string)Scalar("SELECT value FROM ledger_meta WHERE key = 'schema_version';")!, CultureInfo.InvariantCulture);
        if (current == from && current < 4)
        {
            Execute("ALTER TABLE looks ADD COLUMN stream text, ADD COLUMN stream_index integer, ADD COLUMN stream_answers integer;" + GuardStreamsDdl);
            AppendOnly("guard_streams");
        }

        if (current == from)
        {
            using var meta = Command("UPDATE ledger_meta SET value = @version WHERE key = 'schema_version';");
            meta.Parameters.AddWithValue("version", SchemaVersion.ToString(CultureInfo.InvariantCulture));
            meta.ExecuteNonQuery();
        }

        transaction.Commit();
    }

    /// <summary>Schema 4's guard streams (see <see cref="SqliteLedgerStore.V4Streams"/>), for new ledgers and upgrades alike.</summary>
    private const string GuardStreamsDdl = """
        CREATE TABLE guard_streams (
            seq         bigint PRIMARY KEY,
            holdout_id  bigint NOT NULL,
            name        text NOT NULL,
            guard       text NOT NULL,
            seed        bigint,
            created_at  text NOT NULL,
            UNIQUE (holdout_id, name)
        );
        CREATE INDEX looks_by_stream ON looks (holdout_id, stream, number) WHERE stream IS NOT NULL;
        """;

    // The columns and their meaning are those of the SQLite ledger (see SqliteLedgerStore), so that rows move between the
    // two unchanged. Losses are stored without compression: bitsets of errors do not compress and the attempt costs time.
    private const string Ddl = """
        CREATE TABLE ledger_meta (key text PRIMARY KEY, value text NOT NULL);
        CREATE TABLE entries (
            seq       bigint PRIMARY KEY,
            kind      text NOT NULL,
            prev_hash bytea NOT NULL,
            hash      bytea NOT NULL
        );
        CREATE TABLE holdouts (
            id          bigint PRIMARY KEY,
            seq         bigint NOT NULL UNIQUE,
            name        text NOT NULL UNIQUE,
            size        integer NOT NULL,
            metric      text NOT NULL,
            loss_low    double precision NOT NULL,
            loss_high   double precision NOT NULL,
            fingerprint text NOT NULL,
            ids         bytea NOT NULL,
            labels      bytea NOT NULL,
            created_at  text NOT NULL
        );
        CREATE TABLE looks (
            seq                  bigint PRIMARY KEY,
            holdout_id           bigint NOT NULL,
            number               integer NOT NULL,
            configuration        text NOT NULL,
            configuration_digest text NOT NULL,
            score                double precision NOT NULL,
            adaptive             integer NOT NULL,
            loss_encoding        integer NOT NULL,
            losses               bytea,
            search               text,
            stage                text,
            seconds              double precision,
            recorded_at          text NOT NULL,
            guard                text,
            released             double precision,
            holdout_answered     integer,
            train_score          double precision,
            stream               text,
            stream_index         integer,
            stream_answers       integer,
            UNIQUE (holdout_id, number)
        );
        ALTER TABLE looks ALTER COLUMN losses SET STORAGE EXTERNAL;
        CREATE TABLE voids (
            seq         bigint PRIMARY KEY,
            holdout_id  bigint NOT NULL,
            look_number integer NOT NULL,
            reason      text NOT NULL,
            recorded_at text NOT NULL
        );
        CREATE TABLE openings (
            seq              bigint PRIMARY KEY,
            holdout_id       bigint NOT NULL,
            look_number      integer NOT NULL,
            test_size        integer NOT NULL,
            test_fingerprint text NOT NULL,
            test_score       double precision NOT NULL,
            recorded_at      text NOT NULL
        );
        CREATE INDEX looks_by_score ON looks (holdout_id, score, number, adaptive, loss_encoding);
        CREATE FUNCTION ledger_append_only() RETURNS trigger LANGUAGE plpgsql AS $body$
        BEGIN
            RAISE EXCEPTION 'the ledger is append-only';
        END
        $body$;
        """;

    /// <summary>Starts a write: a transaction holding the chain lock, waiting at most the lock timeout for other writers.</summary>
    private NpgsqlTransaction BeginWrite()
    {
        var transaction = _connection.BeginTransaction();
        Execute($"SET LOCAL lock_timeout = {(long)_lockTimeout.TotalMilliseconds}; LOCK TABLE entries IN EXCLUSIVE MODE;");
        return transaction;
    }

    public Holdout AddHoldout(string name, Metric metric, LossRange range, IReadOnlyList<HoldoutExample> sortedExamples) => Guarded(() =>
    {
        using var transaction = BeginWrite();
        if (FindHoldout(name) is not null)
        {
            throw AccountantException.BadInput($"a holdout named '{name}' is already registered; choose another name (a holdout cannot be replaced).");
        }

        var fingerprint = Fingerprint.Compute(sortedExamples);
        var ids = Fingerprint.PackStrings(sortedExamples.Select(e => e.Id));
        var labels = Fingerprint.PackStrings(sortedExamples.Select(e => e.Label));
        var created = Chain.Timestamp(_clock.GetUtcNow());
        var (sequence, previous) = Tail();
        var id = Convert.ToInt64(Scalar("SELECT COALESCE(MAX(id), 0) + 1 FROM holdouts;"), CultureInfo.InvariantCulture);
        var canonical = Chain.HoldoutEntry(sequence, name, sortedExamples.Count, metric, range.Low, range.High, fingerprint, ids, labels, created);
        InsertEntry(sequence, "holdout", previous, Chain.Link(previous, canonical));
        using (var command = Command("""
            INSERT INTO holdouts (id, seq, name, size, metric, loss_low, loss_high, fingerprint, ids, labels, created_at)
            VALUES (@id, @seq, @name, @size, @metric, @low, @high, @fingerprint, @ids, @labels, @created);
            """))
        {
            command.Parameters.AddWithValue("id", id);
            command.Parameters.AddWithValue("seq", sequence);
            command.Parameters.AddWithValue("name", name);
            command.Parameters.AddWithValue("size", sortedExamples.Count);
            command.Parameters.AddWithValue("metric", metric.Name());
            command.Parameters.AddWithValue("low", range.Low);
            command.Parameters.AddWithValue("high", range.High);
            command.Parameters.AddWithValue("fingerprint", fingerprint);
            command.Parameters.AddWithValue("ids", ids);
            command.Parameters.AddWithValue("labels", labels);
            command.Parameters.AddWithValue("created", created);
            command.ExecuteNonQuery();
        }

        transaction.Commit();
        return FindHoldout(name)!;
    });

    public Holdout? FindHoldout(string name) => Guarded(() => LedgerReads.FindHoldout(_connection, name));

    public IReadOnlyList<Holdout> Holdouts() => Guarded(() => LedgerReads.Holdouts(_connection));

    public IReadOnlyList<HoldoutExample> Examples(Holdout holdout) => Guarded(() => LedgerReads.Examples(_connection, holdout));

    /// <summary>Batches at least this large go in by binary COPY; smaller ones by prepared inserts.</summary>
    private const int CopyBatch = 16;

    public IReadOnlyList<Look> AppendLooks(Holdout holdout, Func<IReadOnlyList<NewLook>> looks) => Guarded(() =>
    {
        using var transaction = BeginWrite();
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
            var insert = new NpgsqlBatchCommand("INSERT INTO guard_streams (seq, holdout_id, name, guard, seed, created_at) VALUES (@seq, @id, @name, @guard, @seed, @created);");
            insert.Parameters.Add(new NpgsqlParameter<long>("seq", sequence));
            insert.Parameters.Add(new NpgsqlParameter<long>("id", holdout.Key));
            insert.Parameters.Add(new NpgsqlParameter<string>("name", open.Name));
            insert.Parameters.Add(new NpgsqlParameter<string>("guard", open.Guard.ToString()));
            insert.Parameters.Add(Nullable("seed", open.Seed is { } seed ? unchecked((long)seed) : null, NpgsqlDbType.Bigint));
            insert.Parameters.Add(new NpgsqlParameter<string>("created", created));
            using var batch = new NpgsqlBatch(_connection) { BatchCommands = { EntryInsert(sequence, "stream", previous, Chain.Link(previous, canonical)), insert } };
            batch.ExecuteNonQuery();
        }
    }

    /// <summary>The work of <see cref="AppendLooks(Holdout, Func{IReadOnlyList{NewLook}})"/> inside a write transaction (holding the chain lock) the caller began and will commit.</summary>
    private List<Look> AppendLooksInTransaction(Holdout holdout, IReadOnlyList<NewLook> looks)
    {
        OpenStreams(holdout, looks);
        // The holdout's last look number and the chain's tail in one round trip.
        int number;
        long sequence;
        byte[] previous;
        using (var state = Command("""
            SELECT (SELECT COALESCE(MAX(number), 0) FROM looks WHERE holdout_id = @id), e.seq, e.hash
            FROM (SELECT 1) AS one LEFT JOIN (SELECT seq, hash FROM entries ORDER BY seq DESC LIMIT 1) AS e ON true;
            """))
        {
            state.Parameters.AddWithValue("id", holdout.Key);
            using var reader = state.ExecuteReader();
            reader.Read();
            number = reader.GetInt32(0);
            (sequence, previous) = reader.IsDBNull(1) ? (1L, Chain.Genesis) : (reader.GetInt64(1) + 1, (byte[])reader.GetValue(2));
        }

        var recorded = Chain.Timestamp(_clock.GetUtcNow());
        var recordedAt = Chain.ParseTimestamp(recorded);

        // Each look's digest, canonical entry and chain hash, in order; for a large batch a worker thread computes them
        // ahead of the rows being sent (see LookChain), so hashing and the COPY overlap.
        var (firstSequence, firstNumber) = (sequence, number + 1);
        using var chain = new LookChain(looks, previous, (i, digest) =>
        {
            var look = looks[i];
            return Chain.LookEntry(firstSequence + i, holdout.Fingerprint, firstNumber + i, look.Configuration, digest, look.Score, look.Adaptive,
                look.LossEncoding, look.Losses, look.Search, look.Stage, look.Seconds, recorded, look.Release);
        });
        var digests = new string[looks.Count];
        var links = new (byte[] Previous, byte[] Hash)[looks.Count];
        (byte[] Previous, byte[] Hash) Link(int i)
        {
            var (digest, hash) = chain.Take(i);
            digests[i] = digest;
            links[i] = (i == 0 ? previous : links[i - 1].Hash, hash);
            return links[i];
        }

        if (looks.Count >= CopyBatch)
        {
            CopyLooks(holdout, looks, Link, digests, firstSequence, firstNumber, recorded);
        }
        else
        {
            // A few looks (a worker recording one): every insert in one batch, one round trip.
            using var batch = new NpgsqlBatch(_connection);
            for (var i = 0; i < looks.Count; i++)
            {
                Link(i);
                batch.BatchCommands.Add(EntryInsert(firstSequence + i, "look", links[i].Previous, links[i].Hash));
                batch.BatchCommands.Add(LookInsert(holdout.Key, firstSequence + i, firstNumber + i, looks[i], digests[i], recorded));
            }

            batch.ExecuteNonQuery();
        }

        return looks.Select((look, i) => new Look(firstSequence + i, firstNumber + i, look.Configuration, digests[i], look.Score, look.LossEncoding,
            look.Search, look.Stage, look.Adaptive, recordedAt, look.Seconds, look.Release)).ToList();
    }

    /// <summary>Sends the batch by binary COPY: the chain entries as <paramref name="link"/> yields them, then the looks.</summary>
    private void CopyLooks(Holdout holdout, IReadOnlyList<NewLook> looks, Func<int, (byte[] Previous, byte[] Hash)> link, string[] digests, long firstSequence, int firstNumber, string recorded)
    {
        using (var writer = _connection.BeginBinaryImport("COPY entries (seq, kind, prev_hash, hash) FROM STDIN (FORMAT BINARY);"))
        {
            for (var i = 0; i < looks.Count; i++)
            {
                var (previous, hash) = link(i);
                writer.StartRow();
                writer.Write(firstSequence + i, NpgsqlDbType.Bigint);
                writer.Write("look", NpgsqlDbType.Text);
                writer.Write(previous, NpgsqlDbType.Bytea);
                writer.Write(hash, NpgsqlDbType.Bytea);
            }

            writer.Complete();
        }

        using (var writer = _connection.BeginBinaryImport($"COPY looks ({LookInsertColumns}) FROM STDIN (FORMAT BINARY);"))
        {
            for (var i = 0; i < looks.Count; i++)
            {
                var look = looks[i];
                writer.StartRow();
                writer.Write(firstSequence + i, NpgsqlDbType.Bigint);
                writer.Write(holdout.Key, NpgsqlDbType.Bigint);
                writer.Write(firstNumber + i, NpgsqlDbType.Integer);
                writer.Write(look.Configuration, NpgsqlDbType.Text);
                writer.Write(digests[i], NpgsqlDbType.Text);
                writer.Write(look.Score, NpgsqlDbType.Double);
                writer.Write(look.Adaptive ? 1 : 0, NpgsqlDbType.Integer);
                writer.Write((int)look.LossEncoding, NpgsqlDbType.Integer);
                WriteOrNull(writer, look.Losses, NpgsqlDbType.Bytea);
                WriteOrNull(writer, look.Search, NpgsqlDbType.Text);
                WriteOrNull(writer, look.Stage, NpgsqlDbType.Text);
                WriteOrNull(writer, look.Seconds, NpgsqlDbType.Double);
                writer.Write(recorded, NpgsqlDbType.Text);
                WriteOrNull(writer, look.Release?.Guard, NpgsqlDbType.Text);
                WriteOrNull(writer, look.Release?.Value, NpgsqlDbType.Double);
                WriteOrNull<int>(writer, look.Release is { } r ? (r.HoldoutAnswered ? 1 : 0) : null, NpgsqlDbType.Integer);
                WriteOrNull(writer, look.Release?.TrainScore, NpgsqlDbType.Double);
                WriteOrNull(writer, look.Release?.Stream, NpgsqlDbType.Text);
                WriteOrNull(writer, look.Release?.Index, NpgsqlDbType.Integer);
                WriteOrNull(writer, look.Release?.Answers, NpgsqlDbType.Integer);
            }

            writer.Complete();
        }
    }

    private static void WriteOrNull<T>(NpgsqlBinaryImporter writer, T? value, NpgsqlDbType type)
    {
        if (value is null) writer.WriteNull();
        else writer.Write(value, type);
    }

    private static void WriteOrNull<T>(NpgsqlBinaryImporter writer, T? value, NpgsqlDbType type) where T : struct
    {
        if (value is { } v) writer.Write(v, type);
        else writer.WriteNull();
    }

    private const string LookInsertColumns = "seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, search, stage, seconds, recorded_at, guard, released, holdout_answered, train_score, stream, stream_index, stream_answers";

    private static NpgsqlBatchCommand LookInsert(long holdoutKey, long sequence, int number, NewLook look, string digest, string recorded)
    {
        var insert = new NpgsqlBatchCommand($"""
            INSERT INTO looks ({LookInsertColumns})
            VALUES (@seq, @holdout, @number, @configuration, @digest, @score, @adaptive, @encoding, @losses, @search, @stage, @seconds, @recorded, @guard, @released, @answered, @train, @stream, @index, @answers);
            """);
        var p = insert.Parameters;
        p.Add(new NpgsqlParameter<long>("seq", sequence));
        p.Add(new NpgsqlParameter<long>("holdout", holdoutKey));
        p.Add(new NpgsqlParameter<int>("number", number));
        p.Add(new NpgsqlParameter<string>("configuration", look.Configuration));
        p.Add(new NpgsqlParameter<string>("digest", digest));
        p.Add(new NpgsqlParameter<double>("score", look.Score));
        p.Add(new NpgsqlParameter<int>("adaptive", look.Adaptive ? 1 : 0));
        p.Add(new NpgsqlParameter<int>("encoding", (int)look.LossEncoding));
        p.Add(Nullable("losses", look.Losses, NpgsqlDbType.Bytea));
        p.Add(Nullable("search", look.Search, NpgsqlDbType.Text));
        p.Add(Nullable("stage", look.Stage, NpgsqlDbType.Text));
        p.Add(Nullable("seconds", look.Seconds, NpgsqlDbType.Double));
        p.Add(new NpgsqlParameter<string>("recorded", recorded));
        p.Add(Nullable("guard", look.Release?.Guard, NpgsqlDbType.Text));
        p.Add(Nullable("released", look.Release?.Value, NpgsqlDbType.Double));
        p.Add(Nullable("answered", look.Release is { } r ? (r.HoldoutAnswered ? 1 : 0) : null, NpgsqlDbType.Integer));
        p.Add(Nullable("train", look.Release?.TrainScore, NpgsqlDbType.Double));
        p.Add(Nullable("stream", look.Release?.Stream, NpgsqlDbType.Text));
        p.Add(Nullable("index", look.Release?.Index, NpgsqlDbType.Integer));
        p.Add(Nullable("answers", look.Release?.Answers, NpgsqlDbType.Integer));
        return insert;
    }

    private static NpgsqlParameter Nullable(string name, object? value, NpgsqlDbType type) => new(name, type) { Value = value ?? DBNull.Value };

    public LookVoid AppendVoid(Holdout holdout, int lookNumber, string reason) => Guarded(() =>
    {
        using var transaction = BeginWrite();
        if (!LookExists(holdout, lookNumber))
        {
            throw AccountantException.BadArguments($"holdout '{holdout.Name}' has no look {lookNumber}; 'accountant statement {holdout.Name}' lists how many looks it has.");
        }

        var recorded = Chain.Timestamp(_clock.GetUtcNow());
        var (sequence, previous) = Tail();
        var canonical = Chain.VoidEntry(sequence, holdout.Fingerprint, lookNumber, reason, recorded);
        InsertEntry(sequence, "void", previous, Chain.Link(previous, canonical));
        using (var command = Command("INSERT INTO voids (seq, holdout_id, look_number, reason, recorded_at) VALUES (@seq, @id, @number, @reason, @recorded);"))
        {
            command.Parameters.AddWithValue("seq", sequence);
            command.Parameters.AddWithValue("id", holdout.Key);
            command.Parameters.AddWithValue("number", lookNumber);
            command.Parameters.AddWithValue("reason", reason);
            command.Parameters.AddWithValue("recorded", recorded);
            command.ExecuteNonQuery();
        }

        transaction.Commit();
        return new LookVoid(sequence, lookNumber, reason, Chain.ParseTimestamp(recorded));
    });

    public TestOpening AppendOpening(Holdout holdout, int lookNumber, int testSize, string testFingerprint, double testScore) => Guarded(() =>
    {
        using var transaction = BeginWrite();
        if (!LookExists(holdout, lookNumber))
        {
            throw AccountantException.BadArguments($"holdout '{holdout.Name}' has no look {lookNumber} to open the test set for.");
        }

        var recorded = Chain.Timestamp(_clock.GetUtcNow());
        var (sequence, previous) = Tail();
        var canonical = Chain.OpeningEntry(sequence, holdout.Fingerprint, lookNumber, testSize, testFingerprint, testScore, recorded);
        InsertEntry(sequence, "opening", previous, Chain.Link(previous, canonical));
        using (var command = Command("INSERT INTO openings (seq, holdout_id, look_number, test_size, test_fingerprint, test_score, recorded_at) VALUES (@seq, @id, @look, @size, @fingerprint, @score, @recorded);"))
        {
            command.Parameters.AddWithValue("seq", sequence);
            command.Parameters.AddWithValue("id", holdout.Key);
            command.Parameters.AddWithValue("look", lookNumber);
            command.Parameters.AddWithValue("size", testSize);
            command.Parameters.AddWithValue("fingerprint", testFingerprint);
            command.Parameters.AddWithValue("score", testScore);
            command.Parameters.AddWithValue("recorded", recorded);
            command.ExecuteNonQuery();
        }

        transaction.Commit();
        return new TestOpening(sequence, lookNumber, testSize, testFingerprint, testScore, Chain.ParseTimestamp(recorded));
    });

    private bool LookExists(Holdout holdout, int lookNumber) => LedgerReads.LookExists(_connection, holdout, lookNumber);

    public IReadOnlyList<TestOpening> Openings(Holdout holdout) => Guarded(() => LedgerReads.Openings(_connection, holdout));

    public IReadOnlyList<Look> Looks(Holdout holdout) => Guarded(() => LedgerReads.Looks(_connection, holdout));

    /// <summary>The tally of <see cref="LedgerReads.Tally"/>, in one repeatable-read transaction (one snapshot).</summary>
    /// <remarks>
    /// Without just-in-time compilation: the server's default (<c>jit_above_cost</c> 100,000) compiles the counting pass
    /// from about 2.5 million looks on (its plan cost 117,881 at 3 million), and a command's connection is new, so it
    /// pays for loading the compiler too. At 3 million looks, one new connection per run as a command has, the count took
    /// 388–459 ms with JIT and 315–391 ms without (pgbench -C, 8 runs each, two rounds, load average about 4).
    /// </remarks>
    public Statements.LookTally Tally(Holdout holdout, IReadOnlySet<int> voided) => Guarded(() =>
    {
        using var snapshot = _connection.BeginTransaction(System.Data.IsolationLevel.RepeatableRead);
        Execute("SET LOCAL jit = off;");
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

    /// <summary>The stored rows, read from one snapshot (a repeatable-read, read-only transaction).</summary>
    public ILedgerRows Rows() => new DbLedgerRows(_connection, () => _connection.BeginTransaction(System.Data.IsolationLevel.RepeatableRead));

    public ChainReport Import(ILedgerRows source, string? expectedHead) => Guarded(() =>
    {
        using var transaction = BeginWrite();
        if (Scalar("SELECT count(*) FROM entries;") is not 0L)
        {
            throw new AccountantException(ErrorKind.LedgerUnusable, $"the ledger at {Location} is not empty; copy into a new ledger (a fresh database or ?schema=NAME).");
        }

        var report = LedgerCopy.Write(_connection, transaction, source, expectedHead);
        transaction.Commit();
        return report;
    });

    private (long Sequence, byte[] Previous) Tail() => LedgerReads.Tail(_connection);

    private void InsertEntry(long sequence, string kind, byte[] previous, byte[] hash)
    {
        using var batch = new NpgsqlBatch(_connection) { BatchCommands = { EntryInsert(sequence, kind, previous, hash) } };
        batch.ExecuteNonQuery();
    }

    private static NpgsqlBatchCommand EntryInsert(long sequence, string kind, byte[] previous, byte[] hash)
    {
        var command = new NpgsqlBatchCommand("INSERT INTO entries (seq, kind, prev_hash, hash) VALUES (@seq, @kind, @prev, @hash);");
        command.Parameters.Add(new NpgsqlParameter<long>("seq", sequence));
        command.Parameters.Add(new NpgsqlParameter<string>("kind", kind));
        command.Parameters.Add(new NpgsqlParameter<byte[]>("prev", previous));
        command.Parameters.Add(new NpgsqlParameter<byte[]>("hash", hash));
        return command;
    }

    private NpgsqlCommand Command(string sql) => new(sql, _connection);

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

    private void Execute(string sql)
    {
        using var command = Command(sql);
        command.ExecuteNonQuery();
    }

    private static string Quote(string identifier) => "\"" + identifier.Replace("\"", "\"\"", StringComparison.Ordinal) + "\"";

    private T Guarded<T>(Func<T> action)
    {
        try
        {
            return action();
        }
        catch (Exception e) when (e is NpgsqlException or TimeoutException or SocketException)
        {
            throw Translate(e, Location, _lockTimeout);
        }
        catch (Exception e) when (e is InvalidCastException or FormatException or OverflowException)
        {
            throw new AccountantException(ErrorKind.Integrity, $"the ledger at {Location} holds a damaged row ({e.Message.TrimEnd('.')}); run 'accountant verify' to find the first bad entry.", e);
        }
    }

    /// <summary>Turns PostgreSQL's SQLSTATE codes and Npgsql's connection errors into errors that say what to do.</summary>
    internal static AccountantException Translate(Exception e, string location, TimeSpan lockTimeout)
    {
        if (e is PostgresException p)
        {
            return p.SqlState switch
            {
                "55P03" => new AccountantException(ErrorKind.LedgerUnusable, $"the ledger at {location} stayed locked by another writer for more than {lockTimeout.TotalSeconds:0.#} s; retry when the other process has finished (nothing was written).", e),
                "28P01" or "28000" => new AccountantException(ErrorKind.LedgerUnusable, $"PostgreSQL refused the login to {location} ({p.MessageText.TrimEnd('.')}); give the password in the address, in PGPASSWORD or in a password file (PGPASSFILE or ~/.pgpass).", e),
                "3D000" => new AccountantException(ErrorKind.LedgerUnusable, $"the database named in {location} does not exist; create it (createdb) or fix the address.", e),
                "42501" => new AccountantException(ErrorKind.LedgerUnusable, $"the PostgreSQL user has no permission for the ledger at {location} ({p.MessageText.TrimEnd('.')}); grant it or connect as another user (nothing was written).", e),
                "25006" => new AccountantException(ErrorKind.LedgerUnusable, $"the ledger at {location} is read-only (a read-only server or transaction); point --ledger at the primary server (nothing was written).", e),
                "53100" => new AccountantException(ErrorKind.LedgerUnusable, $"the disk of the PostgreSQL server holding {location} is full; free space and retry (nothing was written).", e),
                "P0001" when p.MessageText.Contains("append-only", StringComparison.Ordinal) =>
                    new AccountantException(ErrorKind.Integrity, "the ledger is append-only: entries cannot be changed or removed (void a look instead).", e),
                "23505" => new AccountantException(ErrorKind.LedgerUnusable, $"another writer added the same entry to {location} at the same moment; retry (nothing was written).", e),
                _ => new AccountantException(ErrorKind.LedgerUnusable, $"the ledger at {location} could not be used: {p.MessageText.TrimEnd('.')} (PostgreSQL code {p.SqlState}); nothing was written.", e),
            };
        }

        if (e.Message.Contains("password", StringComparison.OrdinalIgnoreCase))
        {
            return new AccountantException(ErrorKind.LedgerUnusable, $"PostgreSQL asks for a password to {location} and none was given; give it in the address, in PGPASSWORD or in a password file (PGPASSFILE or ~/.pgpass).", e);
        }

        var reason = (e.InnerException ?? e).Message.TrimEnd('.');
        return new AccountantException(ErrorKind.LedgerUnusable, $"cannot reach the PostgreSQL server for {location} ({reason}); check the host and port and that the server is running (nothing was written).", e);
    }

    public void Dispose() => _connection.Dispose();
}
