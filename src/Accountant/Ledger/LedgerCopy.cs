using System.Data;
using System.Data.Common;

namespace Accountant.Ledger;

/// <summary>
/// Writes another ledger's rows, unchanged, into an empty ledger inside the caller's transaction, then recomputes the
/// chain from what was written (same connection, same transaction) before the caller commits. Plain SQL that SQLite and
/// PostgreSQL both accept, so a copy goes either way with one piece of code.
/// </summary>
internal static class LedgerCopy
{
    public static ChainReport Write(DbConnection connection, DbTransaction transaction, ILedgerRows source, string? expectedHead)
    {
        using var entry = Prepare(connection, transaction, "INSERT INTO entries (seq, kind, prev_hash, hash) VALUES (@p0, @p1, @p2, @p3);",
            DbType.Int64, DbType.String, DbType.Binary, DbType.Binary);
        using var holdout = Prepare(connection, transaction, "INSERT INTO holdouts (id, seq, name, size, metric, loss_low, loss_high, fingerprint, ids, labels, created_at) VALUES (@p0, @p1, @p2, @p3, @p4, @p5, @p6, @p7, @p8, @p9, @p10);",
            DbType.Int64, DbType.Int64, DbType.String, DbType.Int32, DbType.String, DbType.Double, DbType.Double, DbType.String, DbType.Binary, DbType.Binary, DbType.String);
        using var look = Prepare(connection, transaction, "INSERT INTO looks (seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, search, stage, seconds, recorded_at, guard, released, holdout_answered, train_score, stream, stream_index, stream_answers) VALUES (@p0, @p1, @p2, @p3, @p4, @p5, @p6, @p7, @p8, @p9, @p10, @p11, @p12, @p13, @p14, @p15, @p16, @p17, @p18, @p19);",
            DbType.Int64, DbType.Int64, DbType.Int32, DbType.String, DbType.String, DbType.Double, DbType.Int32, DbType.Int32, DbType.Binary, DbType.String, DbType.String, DbType.Double, DbType.String, DbType.String, DbType.Double, DbType.Int32, DbType.Double,
            DbType.String, DbType.Int32, DbType.Int32);
        using var stream = Prepare(connection, transaction, "INSERT INTO guard_streams (seq, holdout_id, name, guard, seed, created_at) VALUES (@p0, @p1, @p2, @p3, @p4, @p5);",
            DbType.Int64, DbType.Int64, DbType.String, DbType.String, DbType.Int64, DbType.String);
        using var @void = Prepare(connection, transaction, "INSERT INTO voids (seq, holdout_id, look_number, reason, recorded_at) VALUES (@p0, @p1, @p2, @p3, @p4);",
            DbType.Int64, DbType.Int64, DbType.Int32, DbType.String, DbType.String);
        using var opening = Prepare(connection, transaction, "INSERT INTO openings (seq, holdout_id, look_number, test_size, test_fingerprint, test_score, recorded_at) VALUES (@p0, @p1, @p2, @p3, @p4, @p5, @p6);",
            DbType.Int64, DbType.Int64, DbType.Int32, DbType.Int32, DbType.String, DbType.Double, DbType.String);

        using (source.Snapshot())
        {
            foreach (var chunk in source.Chunks())
            {
                if (chunk.Damaged.Count > 0)
                {
                    throw new AccountantException(ErrorKind.Integrity, $"the source ledger has a damaged row at entry {chunk.Damaged.Min()}; run 'accountant verify' on it (nothing was copied).");
                }

                foreach (var e in chunk.Entries) Run(entry, e.Sequence, e.Kind, e.Previous, e.Hash);
                foreach (var h in chunk.Holdouts.Values) Run(holdout, h.Id, h.Sequence, h.Name, h.Size, h.Metric, h.LossLow, h.LossHigh, h.Fingerprint, h.Ids, h.Labels, h.CreatedAt);
                foreach (var l in chunk.Looks.Values)
                {
                    Run(look, l.Sequence, l.HoldoutId, l.Number, l.Configuration, l.ConfigurationDigest, l.Score, l.Adaptive, l.LossEncoding, l.Losses, l.Search, l.Stage, l.Seconds, l.RecordedAt,
                        l.Release?.Guard, l.Release?.Value, l.Release is { } r ? (r.HoldoutAnswered ? 1 : 0) : null, l.Release?.TrainScore,
                        l.Release?.Stream, l.Release?.Index, l.Release?.Answers);
                }

                foreach (var g in chunk.Streams.Values) Run(stream, g.Sequence, g.HoldoutId, g.Name, g.Guard, g.Seed, g.CreatedAt);

                foreach (var v in chunk.Voids.Values) Run(@void, v.Sequence, v.HoldoutId, v.LookNumber, v.Reason, v.RecordedAt);
                foreach (var o in chunk.Openings.Values) Run(opening, o.Sequence, o.HoldoutId, o.LookNumber, o.TestSize, o.TestFingerprint, o.TestScore, o.RecordedAt);
            }

            if (source.Orphan() is { } orphan)
            {
                throw new AccountantException(ErrorKind.Integrity, $"the source ledger has a {orphan.Kind} row at entry {orphan.Sequence} that is not in its chain; run 'accountant verify' on it (nothing was copied).");
            }
        }

        var report = new ChainVerifier(new DbLedgerRows(connection, null, transaction)).Run(expectedHead);
        if (!report.Valid)
        {
            throw new AccountantException(ErrorKind.Integrity, $"the copy does not verify ({report.Problem}); nothing was written.");
        }

        return report;
    }

    private static DbCommand Prepare(DbConnection connection, DbTransaction transaction, string sql, params DbType[] types)
    {
        var command = connection.CreateCommand();
        command.CommandText = sql;
        command.Transaction = transaction;
        for (var i = 0; i < types.Length; i++)
        {
            var parameter = command.CreateParameter();
            parameter.ParameterName = "@p" + i;
            parameter.DbType = types[i];
            command.Parameters.Add(parameter);
        }

        return command;
    }

    private static void Run(DbCommand command, params object?[] values)
    {
        for (var i = 0; i < values.Length; i++) command.Parameters[i].Value = values[i] ?? DBNull.Value;
        command.ExecuteNonQuery();
    }
}
