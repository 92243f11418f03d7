using System.Data;
using System.Data.Common;

namespace Accountant.Ledger;

/// <summary>
/// Reads a ledger's rows with plain SQL that SQLite and PostgreSQL both accept (the tables have the same columns on both),
/// so that both backends are verified and copied by the same code. A row whose fields cannot be read as their type is
/// reported as damaged by its entry number.
/// </summary>
internal sealed class DbLedgerRows(DbConnection connection, Func<DbTransaction>? beginSnapshot, DbTransaction? existing = null) : ILedgerRows
{
    private DbTransaction? _transaction = existing;

    public IDisposable Snapshot()
    {
        if (_transaction is not null || beginSnapshot is null) return new Scope(null, this);
        _transaction = beginSnapshot();
        return new Scope(_transaction, this);
    }

    private sealed class Scope(DbTransaction? owned, DbLedgerRows rows) : IDisposable
    {
        public void Dispose()
        {
            if (owned is null) return;
            owned.Dispose();
            rows._transaction = null;
        }
    }

    public IEnumerable<LedgerChunk> Chunks(int size = 2000)
    {
        long after = 0;
        while (true)
        {
            var chunk = new LedgerChunk();
            using (var command = Command("SELECT seq, kind, prev_hash, hash FROM entries WHERE seq > @after ORDER BY seq LIMIT @size;", ("@after", after), ("@size", size)))
            using (var reader = command.ExecuteReader())
            {
                while (reader.Read())
                {
                    var sequence = reader.GetInt64(0);
                    try
                    {
                        chunk.Entries.Add(new EntryRow(sequence, reader.GetString(1), (byte[])reader.GetValue(2), (byte[])reader.GetValue(3)));
                    }
                    catch (Exception e) when (Unreadable(e))
                    {
                        chunk.Entries.Add(new EntryRow(sequence, "", [], []));
                        chunk.Damaged.Add(sequence);
                    }
                }
            }

            if (chunk.Entries.Count == 0) yield break;
            var (first, last) = (chunk.Entries[0].Sequence, chunk.Entries[^1].Sequence);
            Read("SELECT seq, id, name, size, metric, loss_low, loss_high, fingerprint, ids, labels, created_at FROM holdouts", first, last, chunk, r =>
                chunk.Holdouts[r.GetInt64(0)] = new HoldoutRow(r.GetInt64(1), r.GetInt64(0), r.GetString(2), r.GetInt32(3), r.GetString(4), r.GetDouble(5), r.GetDouble(6),
                    r.GetString(7), (byte[])r.GetValue(8), (byte[])r.GetValue(9), r.GetString(10)));
            Read("SELECT seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, search, stage, seconds, recorded_at, guard, released, holdout_answered, train_score, stream, stream_index, stream_answers FROM looks", first, last, chunk, r =>
                chunk.Looks[r.GetInt64(0)] = new LookRow(r.GetInt64(0), r.GetInt64(1), r.GetInt32(2), r.GetString(3), r.GetString(4), r.GetDouble(5), r.GetInt32(6), r.GetInt32(7),
                    r.IsDBNull(8) ? null : (byte[])r.GetValue(8), Text(r, 9), Text(r, 10), Real(r, 11), r.GetString(12), ReadRelease(r, 13)));
            Read("SELECT seq, holdout_id, look_number, reason, recorded_at FROM voids", first, last, chunk, r =>
                chunk.Voids[r.GetInt64(0)] = new VoidRow(r.GetInt64(0), r.GetInt64(1), r.GetInt32(2), r.GetString(3), r.GetString(4)));
            Read("SELECT seq, holdout_id, look_number, test_size, test_fingerprint, test_score, recorded_at FROM openings", first, last, chunk, r =>
                chunk.Openings[r.GetInt64(0)] = new OpeningRow(r.GetInt64(0), r.GetInt64(1), r.GetInt32(2), r.GetInt32(3), r.GetString(4), r.GetDouble(5), r.GetString(6)));
            Read("SELECT seq, holdout_id, name, guard, seed, created_at FROM guard_streams", first, last, chunk, r =>
                chunk.Streams[r.GetInt64(0)] = new StreamRow(r.GetInt64(0), r.GetInt64(1), r.GetString(2), r.GetString(3), r.IsDBNull(4) ? null : r.GetInt64(4), r.GetString(5)));
            yield return chunk;
            after = last;
        }
    }

    public (long Sequence, string Kind)? Orphan()
    {
        using var command = Command("""
            SELECT t.seq, t.kind FROM (
                SELECT seq, 'holdout' AS kind FROM holdouts
                UNION ALL SELECT seq, 'look' FROM looks
                UNION ALL SELECT seq, 'void' FROM voids
                UNION ALL SELECT seq, 'opening' FROM openings
                UNION ALL SELECT seq, 'stream' FROM guard_streams) AS t
            LEFT JOIN entries AS e ON e.seq = t.seq
            WHERE e.seq IS NULL OR e.kind <> t.kind
            ORDER BY t.seq LIMIT 1;
            """);
        using var reader = command.ExecuteReader();
        return reader.Read() ? (reader.GetInt64(0), reader.GetString(1)) : null;
    }

    /// <summary>Reads the seven release columns starting at <paramref name="first"/> (guard, released, holdout answered,
    /// training score, stream, stream index, stream answers); null when the look had no guard.</summary>
    internal static Released? ReadRelease(DbDataReader reader, int first) => reader.IsDBNull(first)
        ? null
        : new Released(
            reader.GetString(first),
            reader.IsDBNull(first + 1) ? null : reader.GetDouble(first + 1),
            !reader.IsDBNull(first + 2) && reader.GetInt32(first + 2) != 0,
            reader.IsDBNull(first + 3) ? null : reader.GetDouble(first + 3))
        {
            Stream = reader.IsDBNull(first + 4) ? null : reader.GetString(first + 4),
            Index = reader.IsDBNull(first + 5) ? null : reader.GetInt32(first + 5),
            Answers = reader.IsDBNull(first + 6) ? null : reader.GetInt32(first + 6),
        };

    private static string? Text(DbDataReader r, int i) => r.IsDBNull(i) ? null : r.GetString(i);

    private static double? Real(DbDataReader r, int i) => r.IsDBNull(i) ? null : r.GetDouble(i);

    private static bool Unreadable(Exception e) => e is InvalidCastException or FormatException or OverflowException or ArgumentException or NullReferenceException;

    private void Read(string select, long first, long last, LedgerChunk chunk, Action<DbDataReader> add)
    {
        using var command = Command(select + " WHERE seq BETWEEN @first AND @last ORDER BY seq;", ("@first", first), ("@last", last));
        using var reader = command.ExecuteReader();
        while (reader.Read())
        {
            long sequence;
            try
            {
                sequence = reader.GetInt64(0);
            }
            catch (Exception e) when (Unreadable(e))
            {
                continue; // A row without a readable entry number is found by the orphan check, if at all.
            }

            try
            {
                add(reader);
            }
            catch (Exception e) when (Unreadable(e))
            {
                chunk.Damaged.Add(sequence);
            }
        }
    }

    private DbCommand Command(string sql, params (string Name, long Value)[] parameters)
    {
        var command = connection.CreateCommand();
        command.CommandText = sql;
        command.Transaction = _transaction;
        foreach (var (name, value) in parameters)
        {
            var parameter = command.CreateParameter();
            parameter.ParameterName = name;
            parameter.DbType = DbType.Int64;
            parameter.Value = value;
            command.Parameters.Add(parameter);
        }

        return command;
    }
}
