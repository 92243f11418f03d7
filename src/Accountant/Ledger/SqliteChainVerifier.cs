using System.Globalization;
using Accountant.Bounds;
using Microsoft.Data.Sqlite;

namespace Accountant.Ledger;

/// <summary>
/// Recomputes the chain of a SQLite ledger from its typed rows, in entry order, and reports the first entry that
/// does not match: a changed field, a missing or extra row, a reordered entry, a gap in look numbers, or a row that
/// is in a table but not in the chain.
/// </summary>
internal sealed class SqliteChainVerifier(SqliteConnection connection)
{
    private sealed record HoldoutState(string Fingerprint, int Size, Metric Metric)
    {
        public int LastLook { get; set; }
    }

    public ChainReport Run(string? expectedHead)
    {
        var holdouts = new Dictionary<long, HoldoutState>();
        var previous = Chain.Genesis;
        long expected = 1;
        var sawExpectedHead = expectedHead is null;

        using var entries = Command("SELECT seq, kind, prev_hash, hash FROM entries ORDER BY seq;");
        using var holdout = Command("SELECT id, name, size, metric, loss_low, loss_high, fingerprint, ids, labels, created_at FROM holdouts WHERE seq = $seq;");
        using var look = Command("SELECT holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, search, stage, seconds, recorded_at, guard, released, holdout_answered, train_score FROM looks WHERE seq = $seq;");
        using var @void = Command("SELECT holdout_id, look_number, reason, recorded_at FROM voids WHERE seq = $seq;");
        using var opening = Command("SELECT holdout_id, look_number, test_size, test_fingerprint, test_score, recorded_at FROM openings WHERE seq = $seq;");
        foreach (var command in new[] { holdout, look, @void, opening })
        {
            command.Parameters.Add("$seq", SqliteType.Integer);
        }

        using var reader = entries.ExecuteReader();
        while (reader.Read())
        {
            long sequence = expected;
            try
            {
                sequence = reader.GetInt64(0);
                var kind = reader.GetString(1);
                var storedPrevious = (byte[])reader.GetValue(2);
                var storedHash = (byte[])reader.GetValue(3);

                if (sequence != expected)
                {
                    return Bad(expected - 1, expected, $"entry {expected} is missing from the chain (the next entry is {sequence})");
                }

                if (!storedPrevious.AsSpan().SequenceEqual(previous))
                {
                    return Bad(expected - 1, sequence, $"entry {sequence} does not follow entry {sequence - 1} (its previous hash differs): entries were removed, reordered or inserted");
                }

                var (canonical, problem) = kind switch
                {
                    "holdout" => Holdout(holdout, sequence, holdouts),
                    "look" => Look(look, sequence, holdouts),
                    "void" => Void(@void, sequence, holdouts),
                    "opening" => Opening(opening, sequence, holdouts),
                    _ => ([], $"entry {sequence} has an unknown kind '{kind}'"),
                };

                if (problem is not null)
                {
                    return Bad(expected - 1, sequence, problem);
                }

                var hash = Chain.Link(previous, canonical);
                if (!hash.AsSpan().SequenceEqual(storedHash))
                {
                    return Bad(expected - 1, sequence, $"entry {sequence} ({kind}) was altered: its contents no longer match its hash");
                }

                if (!sawExpectedHead && string.Equals(Chain.Hex(hash), expectedHead, StringComparison.OrdinalIgnoreCase))
                {
                    sawExpectedHead = true;
                }

                previous = hash;
                expected++;
            }
            catch (Exception e) when (e is InvalidCastException or FormatException or OverflowException or ArgumentException)
            {
                return Bad(expected - 1, sequence, $"entry {sequence} was altered: a stored field has the wrong type or form");
            }
        }

        reader.Close();
        var orphan = Orphan();
        if (orphan is { } row)
        {
            return Bad(expected - 1, row.Sequence, $"a {row.Kind} row with entry number {row.Sequence} is not in the chain: it was inserted outside the accountant");
        }

        var head = expected > 1 ? Chain.Hex(previous) : null;
        if (!sawExpectedHead)
        {
            // The chain as stored is consistent but lacks the printed head: name the first entry past its end, the first one missing.
            return new ChainReport(false, expected - 1, head, expected,
                $"the chain does not contain the head {expectedHead}: it ends at entry {expected - 1}, so the ledger was truncated or rolled back to an older copy (entry {expected} onward is missing), or rewritten since that head was printed");
        }

        return new ChainReport(true, expected - 1, head, null, null);
    }

    private static ChainReport Bad(long entries, long at, string problem) => new(false, entries, null, at, problem);

    private static (byte[], string?) Holdout(SqliteCommand command, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        command.Parameters["$seq"].Value = sequence;
        using var r = command.ExecuteReader();
        if (!r.Read())
        {
            return ([], $"entry {sequence} is a holdout whose row was deleted");
        }

        var name = r.GetString(1);
        var size = r.GetInt32(2);
        if (!MetricExtensions.TryParse(r.GetString(3), out var metric))
        {
            return ([], $"entry {sequence} (holdout '{name}') names an unknown metric");
        }

        var fingerprint = r.GetString(6);
        var ids = (byte[])r.GetValue(7);
        var labels = (byte[])r.GetValue(8);
        List<string> idList, labelList;
        try
        {
            idList = Fingerprint.UnpackStrings(ids);
            labelList = Fingerprint.UnpackStrings(labels);
        }
        catch (FormatException)
        {
            return ([], $"entry {sequence} (holdout '{name}') has damaged example data");
        }

        if (idList.Count != size || labelList.Count != size ||
            Fingerprint.Compute(idList.Select((id, i) => new HoldoutExample(id, labelList[i])).ToList()) != fingerprint)
        {
            return ([], $"entry {sequence} (holdout '{name}') was altered: its ids or labels no longer match its fingerprint");
        }

        holdouts[r.GetInt64(0)] = new HoldoutState(fingerprint, size, metric.Value);
        return (Chain.HoldoutEntry(sequence, name, size, metric.Value, r.GetDouble(4), r.GetDouble(5), fingerprint, ids, labels, r.GetString(9)), null);
    }

    private static (byte[], string?) Look(SqliteCommand command, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        command.Parameters["$seq"].Value = sequence;
        using var r = command.ExecuteReader();
        if (!r.Read())
        {
            return ([], $"entry {sequence} is a look whose row was deleted");
        }

        if (!holdouts.TryGetValue(r.GetInt64(0), out var holdout))
        {
            return ([], $"entry {sequence} is a look on a holdout that is not registered before it");
        }

        var number = r.GetInt32(1);
        if (number != holdout.LastLook + 1)
        {
            return ([], $"entry {sequence} is look {number} but the holdout's previous look is {holdout.LastLook}: look numbers must be gapless and in order");
        }

        holdout.LastLook = number;
        var configuration = r.GetString(2);
        var digest = r.GetString(3);
        if (ConfigurationJson.Digest(configuration) != digest)
        {
            return ([], $"entry {sequence} (look {number}) was altered: its configuration no longer matches its digest");
        }

        var encoding = (LossEncoding)r.GetInt32(6);
        var losses = r.IsDBNull(7) ? null : (byte[])r.GetValue(7);
        var score = r.GetDouble(4);
        if (losses is not null && encoding is LossEncoding.Bitset or LossEncoding.Float32)
        {
            var expectedLength = encoding == LossEncoding.Bitset ? (holdout.Size + 7) / 8 : 4L * holdout.Size;
            // (Scores, for AUC, are covered by the hash like every field; the AUC needs the labels to recompute.)
            if (losses.Length != expectedLength)
            {
                return ([], $"entry {sequence} (look {number}) has per-example losses of the wrong length");
            }

            var stand = new Holdout(0, "", holdout.Size, holdout.Metric, LossRange.Unit, holdout.Fingerprint, default);
            if (Losses.Mean(stand, encoding, losses) != score)
            {
                return ([], $"entry {sequence} (look {number}) was altered: its score no longer equals the mean of its per-example losses");
            }
        }

        return (Chain.LookEntry(sequence, holdout.Fingerprint, number, configuration, digest, score, r.GetInt32(5) != 0, encoding, losses,
            r.IsDBNull(8) ? null : r.GetString(8), r.IsDBNull(9) ? null : r.GetString(9), r.IsDBNull(10) ? null : r.GetDouble(10), r.GetString(11),
            SqliteLedgerStore.ReadRelease(r, 12)), null);
    }

    private static (byte[], string?) Void(SqliteCommand command, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        command.Parameters["$seq"].Value = sequence;
        using var r = command.ExecuteReader();
        if (!r.Read())
        {
            return ([], $"entry {sequence} is a void whose row was deleted");
        }

        if (!holdouts.TryGetValue(r.GetInt64(0), out var holdout))
        {
            return ([], $"entry {sequence} is a void on a holdout that is not registered before it");
        }

        var look = r.GetInt32(1);
        if (look < 1 || look > holdout.LastLook)
        {
            return ([], $"entry {sequence} voids look {look}, which was not recorded before it");
        }

        return (Chain.VoidEntry(sequence, holdout.Fingerprint, look, r.GetString(2), r.GetString(3)), null);
    }

    private static (byte[], string?) Opening(SqliteCommand command, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        command.Parameters["$seq"].Value = sequence;
        using var r = command.ExecuteReader();
        if (!r.Read())
        {
            return ([], $"entry {sequence} is a test-set opening whose row was deleted");
        }

        if (!holdouts.TryGetValue(r.GetInt64(0), out var holdout))
        {
            return ([], $"entry {sequence} opens a test set for a holdout that is not registered before it");
        }

        var look = r.GetInt32(1);
        if (look < 1 || look > holdout.LastLook)
        {
            return ([], $"entry {sequence} opens the test set for look {look}, which was not recorded before it");
        }

        return (Chain.OpeningEntry(sequence, holdout.Fingerprint, look, r.GetInt32(2), r.GetString(3), r.GetDouble(4), r.GetString(5)), null);
    }

    private (long Sequence, string Kind)? Orphan()
    {
        using var command = Command("""
            SELECT t.seq, t.kind FROM (
                SELECT seq, 'holdout' AS kind FROM holdouts
                UNION ALL SELECT seq, 'look' FROM looks
                UNION ALL SELECT seq, 'void' FROM voids
                UNION ALL SELECT seq, 'opening' FROM openings) AS t
            LEFT JOIN entries AS e ON e.seq = t.seq
            WHERE e.seq IS NULL OR e.kind <> t.kind
            ORDER BY t.seq LIMIT 1;
            """);
        using var reader = command.ExecuteReader();
        return reader.Read() ? (reader.GetInt64(0), reader.GetString(1)) : null;
    }

    private SqliteCommand Command(string sql)
    {
        var command = connection.CreateCommand();
        command.CommandText = sql;
        return command;
    }
}
