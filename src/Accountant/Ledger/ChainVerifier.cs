using Accountant.Bounds;
using Accountant.Guards;

namespace Accountant.Ledger;

/// <summary>
/// Recomputes the chain of any ledger from its typed rows, in entry order, and reports the first entry that does not
/// match: a changed field, a missing or extra row, a reordered entry, a gap in look numbers, or a row that is in a table
/// but not in the chain. Every backend is checked by this one class, through <see cref="ILedgerRows"/>.
/// <para>
/// It also replays every guard stream: each guarded look's release is recomputed from the stream's declaration (guard and
/// noise seed), the releases before it and the look's own score, and must equal what was recorded (the Ladder, Blum &amp;
/// Hardt 2015, arXiv 1502.04585, Alg. 1; Thresholdout, Dwork et al. 2015, arXiv 1506.02629, Fig. 1). Only Thresholdout
/// releases recorded before streams were declared (schema 3 and older, whose noise was not kept) are taken as recorded.
/// And it recounts each holdout's looks, adaptive looks and ln M_eff from the rows (<see cref="HoldoutRecount"/>).
/// </para>
/// </summary>
public sealed class ChainVerifier(ILedgerRows rows)
{
    private sealed class HoldoutState(string name, string fingerprint, int size, Metric metric, ValueSpace space)
    {
        public string Name { get; } = name;
        public string Fingerprint { get; } = fingerprint;
        public int Size { get; } = size;
        public Metric Metric { get; } = metric;
        public ValueSpace Space { get; } = space;
        public int LastLook { get; set; }
        public Dictionary<string, StreamState> Streams { get; } = new(StringComparer.Ordinal);
        public AdaptiveAccounting.EffectiveLooks Count { get; } = new(space);
        public int Replayed { get; set; }
        public int Unchecked { get; set; }
    }

    private sealed class StreamState(GuardSpec spec)
    {
        public GuardSpec Spec { get; } = spec;
        public bool Declared { get; set; }
        public SeededGuardNoise? Noise { get; set; }
        public GuardState State { get; set; } = GuardState.Empty;
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
                        "stream" => Stream(chunk.Streams.GetValueOrDefault(sequence), sequence, holdouts),
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

        return new ChainReport(true, expected - 1, head, null, null)
        {
            Recounts = holdouts.Values.Select(h => new HoldoutRecount(h.Name, h.Count.Looks, h.Count.Adaptive, h.Count.LogValue, h.Streams.Count, h.Replayed, h.Unchecked)).ToList(),
        };
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

        var space = ValueSpace.Of(metric.Value, r.Size, new LossRange(r.LossLow, r.LossHigh), () => labelList.Count(l => l == Losses.PositiveLabel));
        holdouts[r.Id] = new HoldoutState(r.Name, r.Fingerprint, r.Size, metric.Value, space);
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

        var guard = GuardSpec.Exact;
        if (r.Release is { } release)
        {
            var (spec, problem) = Replay(holdout, r, release, sequence);
            if (problem is not null) return ([], problem);
            guard = spec!;
        }

        holdout.Count.Add(new AccountedLook(r.Adaptive != 0, guard, r.Release?.Stream));
        return (Chain.LookEntry(sequence, holdout.Fingerprint, number, r.Configuration, r.ConfigurationDigest, r.Score, r.Adaptive != 0, encoding, r.Losses,
            r.Search, r.Stage, r.Seconds, r.RecordedAt, r.Release), null);
    }

    /// <summary>Recomputes a guarded look's release from its stream and compares it with what was recorded.</summary>
    private static (GuardSpec?, string?) Replay(HoldoutState holdout, LookRow r, Released release, long sequence)
    {
        var where = $"entry {sequence} (look {r.Number})";
        GuardSpec spec;
        try
        {
            spec = GuardSpec.Parse(release.Guard);
        }
        catch (AccountantException)
        {
            return (null, $"{where} names an unknown guard '{release.Guard}'");
        }

        var name = release.StreamName;
        holdout.Streams.TryGetValue(name, out var stream);
        if (release.Stream is not null)
        {
            if (stream is not { Declared: true })
            {
                return (null, $"{where} is released on the guard stream '{name}', which is not declared before it");
            }

            if (release.Index != stream.State.Releases)
            {
                return (null, $"{where} is release {release.Index} of the guard stream '{name}', but the stream had {stream.State.Releases} releases before it: releases are missing or out of order");
            }
        }

        stream ??= holdout.Streams[name] = new StreamState(spec);
        if (stream.Spec.ToString() != spec.ToString())
        {
            return (null, $"{where} is released by {spec} on the guard stream '{name}', which belongs to {stream.Spec}");
        }

        Release expected;
        if (spec.Kind != GuardKind.Thresholdout || stream.Noise is not null)
        {
            try
            {
                expected = Guard.Apply(spec, stream.State, r.Score, holdout.Space, holdout.Metric.HigherIsBetter(), release.TrainScore, stream.Noise);
            }
            catch (AccountantException)
            {
                return (null, $"{where} was released by {spec} without the training score that guard compares against");
            }

            if (expected.Value != release.Value || expected.HoldoutAnswered != release.HoldoutAnswered)
            {
                return (null, $"{where} was released as {Shown(release.Value, release.HoldoutAnswered)} on the guard stream '{name}', but replaying {spec} from the stream's earlier releases gives {Shown(expected.Value, expected.HoldoutAnswered)}: the release does not follow its guard's rule");
            }

            holdout.Replayed++;
        }
        else
        {
            // A Thresholdout release from before streams were declared: its noise was not kept, so it is taken as recorded.
            expected = new Release(release.Value, release.HoldoutAnswered);
            holdout.Unchecked++;
        }

        stream.State = stream.State.After(expected);
        if (release.Stream is not null && release.Answers != stream.State.HoldoutAnswers)
        {
            return (null, $"{where} records {release.Answers} holdout answers on the guard stream '{name}', but the stream has given {stream.State.HoldoutAnswers}");
        }

        return (spec, null);
    }

    private static string Shown(double? value, bool holdoutAnswered) =>
        (value is { } v ? Chain.Number(v) : "a refusal") + (holdoutAnswered ? " (from the holdout)" : " (not from the holdout)");

    private static (byte[], string?) Stream(StreamRow? r, long sequence, Dictionary<long, HoldoutState> holdouts)
    {
        if (r is null)
        {
            return ([], $"entry {sequence} is a guard stream whose row was deleted");
        }

        if (!holdouts.TryGetValue(r.HoldoutId, out var holdout))
        {
            return ([], $"entry {sequence} declares a guard stream on a holdout that is not registered before it");
        }

        GuardSpec spec;
        try
        {
            spec = GuardSpec.Parse(r.Guard);
        }
        catch (AccountantException)
        {
            return ([], $"entry {sequence} declares the guard stream '{r.Name}' with an unknown guard '{r.Guard}'");
        }

        if (holdout.Streams.TryGetValue(r.Name, out var stream))
        {
            if (stream.Declared) return ([], $"entry {sequence} declares the guard stream '{r.Name}' a second time");
            if (stream.Spec.ToString() != spec.ToString())
            {
                return ([], $"entry {sequence} declares the guard stream '{r.Name}' for {spec}, but its earlier looks were released by {stream.Spec}");
            }
        }
        else
        {
            holdout.Streams[r.Name] = stream = new StreamState(spec);
        }

        if (spec.Kind == GuardKind.Thresholdout && r.Seed is null)
        {
            return ([], $"entry {sequence} declares the thresholdout stream '{r.Name}' without the seed of its noise");
        }

        stream.Declared = true;
        ulong? seed = r.Seed is { } stored ? unchecked((ulong)stored) : null;
        stream.Noise = spec.Kind == GuardKind.Thresholdout ? new SeededGuardNoise(seed!.Value) : null;
        return (Chain.StreamEntry(sequence, holdout.Fingerprint, r.Name, r.Guard, seed, r.CreatedAt), null);
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
