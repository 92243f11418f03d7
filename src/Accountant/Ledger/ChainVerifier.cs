using Accountant.Bounds;

namespace Accountant.Ledger;

/// <summary>
/// Recomputes the chain of any ledger from its typed rows, in entry order, and reports the first entry that does not
/// match: a changed field, a missing or extra row, a reordered entry, a gap in look numbers, or a row that is in a table
/// but not in the chain. Every backend is checked by this one class, through <see cref="ILedgerRows"/>.
/// </summary>
public sealed class ChainVerifier(ILedgerRows rows)
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

        using var snapshot = rows.Snapshot();
        foreach (var chunk in rows.Chunks())
        {
            foreach (var entry in chunk.Entries)
            {
                var sequence = entry.Sequence;
                if (sequence != expected)
                {
                    return Bad(expected - 1, expected, $"entry {expected} is missing from the chain (the next entry is {sequence})");
                }

                if (chunk.Damaged.Contains(sequence))
                {
                    return Bad(expected - 1, sequence, $"entry {sequence} was altered: a stored field has the wrong type or form");
                }

                if (!entry.Previous.AsSpan().SequenceEqual(previous))
                {
                    return Bad(expected - 1, sequence, $"entry {sequence} does not follow entry {sequence - 1} (its previous hash differs): entries were removed, reordered or inserted");
                }

                byte[] canonical;
                string? problem;
                try
                {
                    (canonical, problem) = entry.Kind switch
                    {
                        "holdout" => Holdout(chunk.Holdouts.GetValueOrDefault(sequence), sequence, holdouts),
                        "look" => Look(chunk.Looks.GetValueOrDefault(sequence), sequence, holdouts),
                        "void" => Void(chunk.Voids.GetValueOrDefault(sequence), sequence, holdouts),
                        "opening" => Opening(chunk.Openings.GetValueOrDefault(sequence), sequence, holdouts),
                        _ => ([], $"entry {sequence} has an unknown kind '{entry.Kind}'"),
                    };
                }
                catch (Exception e) when (e is InvalidCastException or FormatException or OverflowException or ArgumentException)
                {
                    return Bad(expected - 1, sequence, $"entry {sequence} was altered: a stored field has the wrong type or form");
                }

                if (problem is not null)
                {
                    return Bad(expected - 1, sequence, problem);
                }

                var hash = Chain.Link(previous, canonical);
                if (!hash.AsSpan().SequenceEqual(entry.Hash))
                {
                    return Bad(expected - 1, sequence, $"entry {sequence} ({entry.Kind}) was altered: its contents no longer match its hash");
                }

                if (!sawExpectedHead && string.Equals(Chain.Hex(hash), expectedHead, StringComparison.OrdinalIgnoreCase))
                {
                    sawExpectedHead = true;
                }

                previous = hash;
                expected++;
            }
        }

        if (rows.Orphan() is { } row)
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

    private static (byte[], string?) Holdout(HoldoutRow? r, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        if (r is null)
        {
            return ([], $"entry {sequence} is a holdout whose row was deleted");
        }

        if (!MetricExtensions.TryParse(r.Metric, out var metric))
        {
            return ([], $"entry {sequence} (holdout '{r.Name}') names an unknown metric");
        }

        List<string> idList, labelList;
        try
        {
            idList = Fingerprint.UnpackStrings(r.Ids);
            labelList = Fingerprint.UnpackStrings(r.Labels);
        }
        catch (FormatException)
        {
            return ([], $"entry {sequence} (holdout '{r.Name}') has damaged example data");
        }

        if (idList.Count != r.Size || labelList.Count != r.Size ||
            Fingerprint.Compute(idList.Select((id, i) => new HoldoutExample(id, labelList[i])).ToList()) != r.Fingerprint)
        {
            return ([], $"entry {sequence} (holdout '{r.Name}') was altered: its ids or labels no longer match its fingerprint");
        }

        holdouts[r.Id] = new HoldoutState(r.Fingerprint, r.Size, metric.Value);
        return (Chain.HoldoutEntry(sequence, r.Name, r.Size, metric.Value, r.LossLow, r.LossHigh, r.Fingerprint, r.Ids, r.Labels, r.CreatedAt), null);
    }

    private static (byte[], string?) Look(LookRow? r, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        if (r is null)
        {
            return ([], $"entry {sequence} is a look whose row was deleted");
        }

        if (!holdouts.TryGetValue(r.HoldoutId, out var holdout))
        {
            return ([], $"entry {sequence} is a look on a holdout that is not registered before it");
        }

        var number = r.Number;
        if (number != holdout.LastLook + 1)
        {
            return ([], $"entry {sequence} is look {number} but the holdout's previous look is {holdout.LastLook}: look numbers must be gapless and in order");
        }

        holdout.LastLook = number;
        if (ConfigurationJson.Digest(r.Configuration) != r.ConfigurationDigest)
        {
            return ([], $"entry {sequence} (look {number}) was altered: its configuration no longer matches its digest");
        }

        var encoding = (LossEncoding)r.LossEncoding;
        if (r.Losses is { } losses && encoding is LossEncoding.Bitset or LossEncoding.Float32)
        {
            var expectedLength = encoding == LossEncoding.Bitset ? (holdout.Size + 7) / 8 : 4L * holdout.Size;
            // (Scores, for AUC, are covered by the hash like every field; the AUC needs the labels to recompute.)
            if (losses.Length != expectedLength)
            {
                return ([], $"entry {sequence} (look {number}) has per-example losses of the wrong length");
            }

            var stand = new Holdout(0, "", holdout.Size, holdout.Metric, LossRange.Unit, holdout.Fingerprint, default);
            if (Losses.Mean(stand, encoding, losses) != r.Score)
            {
                return ([], $"entry {sequence} (look {number}) was altered: its score no longer equals the mean of its per-example losses");
            }
        }

        return (Chain.LookEntry(sequence, holdout.Fingerprint, number, r.Configuration, r.ConfigurationDigest, r.Score, r.Adaptive != 0, encoding, r.Losses,
            r.Search, r.Stage, r.Seconds, r.RecordedAt, r.Release), null);
    }

    private static (byte[], string?) Void(VoidRow? r, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        if (r is null)
        {
            return ([], $"entry {sequence} is a void whose row was deleted");
        }

        if (!holdouts.TryGetValue(r.HoldoutId, out var holdout))
        {
            return ([], $"entry {sequence} is a void on a holdout that is not registered before it");
        }

        if (r.LookNumber < 1 || r.LookNumber > holdout.LastLook)
        {
            return ([], $"entry {sequence} voids look {r.LookNumber}, which was not recorded before it");
        }

        return (Chain.VoidEntry(sequence, holdout.Fingerprint, r.LookNumber, r.Reason, r.RecordedAt), null);
    }

    private static (byte[], string?) Opening(OpeningRow? r, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        if (r is null)
        {
            return ([], $"entry {sequence} is a test-set opening whose row was deleted");
        }

        if (!holdouts.TryGetValue(r.HoldoutId, out var holdout))
        {
            return ([], $"entry {sequence} opens a test set for a holdout that is not registered before it");
        }

        if (r.LookNumber < 1 || r.LookNumber > holdout.LastLook)
        {
            return ([], $"entry {sequence} opens the test set for look {r.LookNumber}, which was not recorded before it");
        }

        return (Chain.OpeningEntry(sequence, holdout.Fingerprint, r.LookNumber, r.TestSize, r.TestFingerprint, r.TestScore, r.RecordedAt), null);
    }
}
