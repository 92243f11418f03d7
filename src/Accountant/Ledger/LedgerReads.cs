using System.Data;
using System.Data.Common;
using Accountant.Bounds;

namespace Accountant.Ledger;

/// <summary>
/// The reads both backends answer with the same SQL over the same tables (named parameters in the <c>@name</c> form,
/// which SQLite and Npgsql both take), so each store's read methods are one line around these.
/// </summary>
internal static class LedgerReads
{
    private const string HoldoutColumns = "id, name, size, metric, loss_low, loss_high, fingerprint, created_at";

    /// <summary>The look columns <see cref="ReadLook"/> reads, in its order (the losses blob is not among them).</summary>
    public const string LookColumns = "seq, number, configuration, configuration_digest, score, loss_encoding, search, stage, adaptive, recorded_at, seconds, guard, released, holdout_answered, train_score, stream, stream_index, stream_answers";

    public static Holdout? FindHoldout(DbConnection connection, string name)
    {
        using var command = Command(connection, $"SELECT {HoldoutColumns} FROM holdouts WHERE name = @name;", ("@name", name));
        using var reader = command.ExecuteReader();
        return reader.Read() ? ReadHoldout(reader) : null;
    }

    public static IReadOnlyList<Holdout> Holdouts(DbConnection connection)
    {
        using var command = Command(connection, $"SELECT {HoldoutColumns} FROM holdouts ORDER BY seq;");
        using var reader = command.ExecuteReader();
        var holdouts = new List<Holdout>();
        while (reader.Read()) holdouts.Add(ReadHoldout(reader));
        return holdouts;
    }

    private static Holdout ReadHoldout(DbDataReader reader) => new(
        reader.GetInt64(0),
        reader.GetString(1),
        reader.GetInt32(2),
        MetricExtensions.Parse(reader.GetString(3)),
        new LossRange(reader.GetDouble(4), reader.GetDouble(5)),
        reader.GetString(6),
        Chain.ParseTimestamp(reader.GetString(7)));

    public static IReadOnlyList<HoldoutExample> Examples(DbConnection connection, Holdout holdout)
    {
        using var command = Command(connection, "SELECT ids, labels FROM holdouts WHERE id = @id;", ("@id", holdout.Key));
        using var reader = command.ExecuteReader();
        if (!reader.Read())
        {
            throw new AccountantException(ErrorKind.Integrity, $"holdout '{holdout.Name}' vanished from the ledger; run 'accountant verify'.");
        }

        var ids = Fingerprint.UnpackStrings((byte[])reader.GetValue(0));
        var labels = Fingerprint.UnpackStrings((byte[])reader.GetValue(1));
        if (ids.Count != labels.Count || ids.Count != holdout.Size)
        {
            throw new AccountantException(ErrorKind.Integrity, $"holdout '{holdout.Name}' has damaged examples in the ledger; run 'accountant verify'.");
        }

        // An array and a loop rather than LINQ: ReadyToRun precompiles this, which keeps a one-look record fast.
        var examples = new HoldoutExample[ids.Count];
        for (var i = 0; i < examples.Length; i++) examples[i] = new HoldoutExample(ids[i], labels[i]);
        return examples;
    }

    public static IReadOnlyList<TestOpening> Openings(DbConnection connection, Holdout holdout)
    {
        using var command = Command(connection, "SELECT seq, look_number, test_size, test_fingerprint, test_score, recorded_at FROM openings WHERE holdout_id = @id ORDER BY seq;", ("@id", holdout.Key));
        using var reader = command.ExecuteReader();
        var openings = new List<TestOpening>();
        while (reader.Read())
        {
            openings.Add(new TestOpening(reader.GetInt64(0), reader.GetInt32(1), reader.GetInt32(2), reader.GetString(3), reader.GetDouble(4), Chain.ParseTimestamp(reader.GetString(5))));
        }

        return openings;
    }

    public static IReadOnlyList<Look> Looks(DbConnection connection, Holdout holdout)
    {
        using var command = Command(connection, $"SELECT {LookColumns} FROM looks WHERE holdout_id = @id ORDER BY number;", ("@id", holdout.Key));
        using var reader = command.ExecuteReader();
        var looks = new List<Look>();
        while (reader.Read()) looks.Add(ReadLook(reader));
        return looks;
    }

    /// <summary>One look from a row of <see cref="LookColumns"/>.</summary>
    public static Look ReadLook(DbDataReader reader) => new(
        reader.GetInt64(0),
        reader.GetInt32(1),
        reader.GetString(2),
        reader.GetString(3),
        reader.GetDouble(4),
        (LossEncoding)reader.GetInt32(5),
        reader.IsDBNull(6) ? null : reader.GetString(6),
        reader.IsDBNull(7) ? null : reader.GetString(7),
        reader.GetInt32(8) != 0,
        Chain.ParseTimestamp(reader.GetString(9)),
        reader.IsDBNull(10) ? null : reader.GetDouble(10),
        DbLedgerRows.ReadRelease(reader, 11));

    /// <summary>
    /// The counts a statement needs and the best look whose number is not in <paramref name="voided"/> (lowest score, or
    /// highest when higher is better; the earliest on ties), read in the caller's snapshot transaction: the same answer
    /// as the look-by-look <see cref="ILedgerStore.Tally"/>, without reading every look.
    /// </summary>
    /// <remarks>
    /// One counting pass over the covering index <c>looks_by_score</c> (holdout, score, number, adaptive, loss encoding);
    /// no table row, configuration or blob is read for it. The best look is then found by walking that index from the
    /// better end, in pages, until a look that is not voided: the voids are tested here, on the rows walked, never in the
    /// database row by row. Since the looks of a holdout have distinct numbers, at most |voided| of them are voided, so
    /// the first |voided| + 1 looks in any order hold a non-voided one when there is one; the walk never reads more.
    /// Testing the voids in SQL instead cost more than the rest of a statement on a million looks when it ran on every row
    /// of the counting pass, and on PostgreSQL its speed rests on the planner: with 200,000 of a million looks voided
    /// (the best ones), <c>NOT EXISTS</c> under <c>ORDER BY score LIMIT 1</c> was planned as a nested loop over the voids
    /// for each look, with statistics and without, and ran for over half an hour; a <c>NOT IN</c> list larger than
    /// <c>work_mem</c> is not hashed but searched for each row.
    /// </remarks>
    public static Statements.LookTally Tally(DbConnection connection, Holdout holdout, IReadOnlySet<int> voided)
    {
        int looks, adaptive, scoreOnly;
        using (var counts = Command(connection, """
            SELECT count(*), count(*) FILTER (WHERE adaptive <> 0), count(*) FILTER (WHERE loss_encoding = 0)
            FROM looks WHERE holdout_id = @id;
            """, ("@id", holdout.Key)))
        using (var reader = counts.ExecuteReader())
        {
            reader.Read();
            looks = checked((int)reader.GetInt64(0));
            adaptive = checked((int)reader.GetInt64(1));
            scoreOnly = checked((int)reader.GetInt64(2));
        }

        // Index order, both columns the same way, so that pages do not overlap; lowest score first for a loss, else highest.
        var order = holdout.Metric.HigherIsBetter() ? "DESC" : "ASC";
        var first = FirstNotVoided(connection, $"SELECT number, score FROM looks WHERE holdout_id = @id ORDER BY score {order}, number {order} LIMIT @limit OFFSET @offset;",
            voided, ("@id", holdout.Key));
        // Walked from the highest score, ties come latest first: the earliest non-voided look with that score is the best.
        if (first is { } top && order == "DESC")
        {
            first = FirstNotVoided(connection, "SELECT number, score FROM looks WHERE holdout_id = @id AND score = @score ORDER BY number LIMIT @limit OFFSET @offset;",
                voided, ("@id", holdout.Key), ("@score", top.Score));
        }

        var best = first is { } chosen ? LookByNumber(connection, holdout, chosen.Number) : null;

        // Adaptive accounting needs the order of adaptive flags and guards; read those two columns only when it applies.
        var pattern = adaptive > 0 ? AdaptivePattern(connection, holdout, looks) : null;
        return new Statements.LookTally(looks, adaptive, scoreOnly, best, pattern);
    }

    /// <summary>
    /// The first row (number, score) of <paramref name="sql"/> whose number is not voided, read in pages of growing size
    /// (the query takes <c>@limit</c> and <c>@offset</c> and orders its rows uniquely); null when every row is voided.
    /// </summary>
    private static (int Number, double Score)? FirstNotVoided(DbConnection connection, string sql, IReadOnlySet<int> voided, params (string Name, object Value)[] parameters)
    {
        // At most voided.Count rows can be voided, so the first voided.Count + 1 rows decide.
        long cap = (long)voided.Count + 1, offset = 0, page = 16;
        while (offset < cap)
        {
            var limit = Math.Min(page, cap - offset);
            using var command = Command(connection, sql, [.. parameters, ("@limit", limit), ("@offset", offset)]);
            using var reader = command.ExecuteReader();
            var rows = 0;
            while (reader.Read())
            {
                rows++;
                var number = reader.GetInt32(0);
                if (!voided.Contains(number)) return (number, reader.GetDouble(1));
            }

            if (rows < limit) return null; // the end of the rows: every one was voided
            offset += limit;
            page *= 4;
        }

        return null; // not reached: the holdout's look numbers are unique, so cap rows cannot all be voided
    }

    /// <summary>One look, read in full, or null when the holdout has no look of that number.</summary>
    private static Look? LookByNumber(DbConnection connection, Holdout holdout, int number)
    {
        using var command = Command(connection, $"SELECT {LookColumns} FROM looks WHERE holdout_id = @id AND number = @number;", ("@id", holdout.Key), ("@number", number));
        using var reader = command.ExecuteReader();
        return reader.Read() ? ReadLook(reader) : null;
    }

    /// <summary>Every look's adaptive flag, guard and stream, in number order: what adaptive accounting needs, and no more.</summary>
    private static List<Guards.AccountedLook> AdaptivePattern(DbConnection connection, Holdout holdout, int looks)
    {
        var pattern = new List<Guards.AccountedLook>(looks);
        var specs = new Dictionary<string, Guards.GuardSpec>(StringComparer.Ordinal);
        using var command = Command(connection, "SELECT adaptive, guard, stream FROM looks WHERE holdout_id = @id ORDER BY number;", ("@id", holdout.Key));
        using var reader = command.ExecuteReader();
        while (reader.Read())
        {
            var guard = reader.IsDBNull(1) ? Guards.GuardSpec.Exact
                : specs.TryGetValue(reader.GetString(1), out var known) ? known : specs[reader.GetString(1)] = Guards.GuardSpec.Parse(reader.GetString(1));
            pattern.Add(new Guards.AccountedLook(reader.GetInt32(0) != 0, guard, reader.IsDBNull(2) ? null : reader.GetString(2)));
        }

        return pattern;
    }

    /// <summary>
    /// One guard stream's recorded state, read in the caller's transaction (a writer holds the chain's lock, so no other
    /// writer can move it meanwhile): its declaration, and from the stream's latest look its release count, holdout answers
    /// and last released value, each an index lookup (<c>looks_by_stream</c>). A stream used only before streams were
    /// declared (schema 3 and older, named by its guard's spelling) is counted from those looks. Null when never used.
    /// </summary>
    public static GuardStreamState? FindGuardStream(DbConnection connection, Holdout holdout, string name)
    {
        GuardStream? declared = null;
        using (var command = Command(connection, "SELECT seq, guard, seed FROM guard_streams WHERE holdout_id = @id AND name = @name;", ("@id", holdout.Key), ("@name", name)))
        using (var reader = command.ExecuteReader())
        {
            if (reader.Read())
            {
                declared = new GuardStream(name, Guards.GuardSpec.Parse(reader.GetString(1)), reader.IsDBNull(2) ? null : unchecked((ulong)reader.GetInt64(2))) { Sequence = reader.GetInt64(0) };
            }
        }

        int releases, answers;
        double? last;
        using (var command = Command(connection, "SELECT stream_index, stream_answers, released FROM looks WHERE holdout_id = @id AND stream = @name ORDER BY number DESC LIMIT 1;", ("@id", holdout.Key), ("@name", name)))
        using (var reader = command.ExecuteReader())
        {
            if (reader.Read())
            {
                releases = reader.GetInt32(0) + 1;
                answers = reader.GetInt32(1);
                last = reader.IsDBNull(2) ? null : reader.GetDouble(2);
            }
            else
            {
                releases = -1;
                answers = 0;
                last = null;
            }
        }

        if (releases >= 0)
        {
            last ??= LastReleased(connection, holdout, "stream = @name", name) ?? LastReleased(connection, holdout, "stream IS NULL AND guard = @name", name);
        }
        else
        {
            // No look on the declared stream yet: what looks of an older schema released under this guard spelling, if any.
            using var command = Command(connection, "SELECT count(*), COALESCE(sum(holdout_answered), 0) FROM looks WHERE holdout_id = @id AND stream IS NULL AND guard = @name;", ("@id", holdout.Key), ("@name", name));
            using var reader = command.ExecuteReader();
            reader.Read();
            releases = Convert.ToInt32(reader.GetValue(0), System.Globalization.CultureInfo.InvariantCulture);
            answers = Convert.ToInt32(reader.GetValue(1), System.Globalization.CultureInfo.InvariantCulture);
            reader.Close();
            last = releases > 0 ? LastReleased(connection, holdout, "stream IS NULL AND guard = @name", name) : null;
        }

        if (declared is null && releases == 0) return null;
        var guard = declared?.Guard ?? Guards.GuardSpec.Parse(name);
        return new GuardStreamState(name, declared, new Guards.GuardState(releases, answers, last), guard);
    }

    /// <summary>The streams a batch of looks opens, each once, in the order of the looks that open them.</summary>
    public static List<GuardStream> StreamsOpened(IReadOnlyList<NewLook> looks)
    {
        var opened = new List<GuardStream>();
        foreach (var look in looks)
        {
            if (look.Opens is { } open && !opened.Exists(o => o.Name == open.Name)) opened.Add(open);
        }

        return opened;
    }

    private static double? LastReleased(DbConnection connection, Holdout holdout, string where, string name)
    {
        using var command = Command(connection, $"SELECT released FROM looks WHERE holdout_id = @id AND {where} AND released IS NOT NULL ORDER BY number DESC LIMIT 1;", ("@id", holdout.Key), ("@name", name));
        return command.ExecuteScalar() is double value ? value : null;
    }

    public static IReadOnlyList<LookVoid> Voids(DbConnection connection, Holdout holdout)
    {
        using var command = Command(connection, "SELECT seq, look_number, reason, recorded_at FROM voids WHERE holdout_id = @id ORDER BY seq;", ("@id", holdout.Key));
        using var reader = command.ExecuteReader();
        var voids = new List<LookVoid>();
        while (reader.Read())
        {
            voids.Add(new LookVoid(reader.GetInt64(0), reader.GetInt32(1), reader.GetString(2), Chain.ParseTimestamp(reader.GetString(3))));
        }

        return voids;
    }

    /// <summary>Every look's number, configuration, loss encoding and losses, in number order, from one open reader.</summary>
    public static IEnumerable<LossRow> LossRows(DbConnection connection, Holdout holdout)
    {
        using var command = Command(connection, "SELECT number, configuration, loss_encoding, losses FROM looks WHERE holdout_id = @id ORDER BY number;", ("@id", holdout.Key));
        using var reader = command.ExecuteReader();
        while (reader.Read())
        {
            yield return new LossRow(reader.GetInt32(0), reader.GetString(1), (LossEncoding)reader.GetInt32(2), reader.IsDBNull(3) ? null : (byte[])reader.GetValue(3));
        }
    }

    public static byte[]? LossBytes(DbConnection connection, Holdout holdout, int lookNumber)
    {
        using var command = Command(connection, "SELECT losses FROM looks WHERE holdout_id = @id AND number = @number;", ("@id", holdout.Key), ("@number", lookNumber));
        return command.ExecuteScalar() as byte[];
    }

    public static bool LookExists(DbConnection connection, Holdout holdout, int lookNumber)
    {
        using var command = Command(connection, "SELECT count(*) FROM looks WHERE holdout_id = @id AND number = @number;", ("@id", holdout.Key), ("@number", lookNumber));
        return Convert.ToInt64(command.ExecuteScalar(), System.Globalization.CultureInfo.InvariantCulture) > 0;
    }

    /// <summary>The hash of the last entry, hex, or null for an empty ledger.</summary>
    public static string? ChainHead(DbConnection connection)
    {
        using var command = Command(connection, "SELECT hash FROM entries ORDER BY seq DESC LIMIT 1;");
        return command.ExecuteScalar() is byte[] hash ? Chain.Hex(hash) : null;
    }

    /// <summary>The number the next entry takes and the hash it links to.</summary>
    public static (long Sequence, byte[] Previous) Tail(DbConnection connection)
    {
        using var command = Command(connection, "SELECT seq, hash FROM entries ORDER BY seq DESC LIMIT 1;");
        using var reader = command.ExecuteReader();
        return reader.Read() ? (reader.GetInt64(0) + 1, (byte[])reader.GetValue(1)) : (1L, Chain.Genesis);
    }

    private static DbCommand Command(DbConnection connection, string sql, params (string Name, object Value)[] parameters)
    {
        var command = connection.CreateCommand();
        command.CommandText = sql;
        foreach (var (name, value) in parameters)
        {
            var parameter = command.CreateParameter();
            parameter.ParameterName = name;
            parameter.Value = value;
            parameter.DbType = value switch { long => DbType.Int64, int => DbType.Int32, double => DbType.Double, _ => DbType.String };
            command.Parameters.Add(parameter);
        }

        return command;
    }
}
