using System.Buffers.Binary;
using System.Numerics;
using Accountant.Bounds;

namespace Accountant.Comparisons;

/// <summary>
/// The anchors of <see cref="ChainedBinomial"/>: the majority vote of the recorded 0/1 losses of every look, and of the looks
/// of each group (a trainer) with at least two looks. An example counts as an anchor's error when more than half of its
/// looks err on it. Every look enters, voided ones too: which looks there are, and their groups, is fixed before the holdout's
/// scores are seen, so each anchor is a fixed function of an example; a void, decided later, must not change it.
/// <para>
/// Looks are added one at a time in any order (a statement streams them from the ledger); each group keeps a bit-sliced
/// counter of how many of its looks err on each example, so memory is about ⌈log2 M⌉ bits per example and group.
/// </para>
/// </summary>
public sealed class MajorityAnchors
{
    private readonly int _n;
    private readonly int _words;
    private readonly BitCounter _all;
    private readonly Dictionary<string, BitCounter> _groups = new(StringComparer.Ordinal);

    public MajorityAnchors(int n)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(n, 1);
        _n = n;
        _words = (n + 63) / 64;
        _all = new BitCounter(_words);
    }

    /// <summary>How many looks were added.</summary>
    public int Looks => _all.Members;

    /// <summary>Adds one look's losses (the ledger's bitset: bit i of byte i/8, least significant first) to the anchors of
    /// every look and of its group (null: no group).</summary>
    public void Add(ReadOnlySpan<byte> losses, string? group) => Add(Words(losses), group);

    /// <summary>Adds one look's losses as 64-bit words (bit i of word i/64), bits past n clear.</summary>
    public void Add(ReadOnlySpan<ulong> losses, string? group)
    {
        if (losses.Length != _words) throw new ArgumentException($"{_words} words expected", nameof(losses));
        _all.Add(losses);
        if (group is null) return;
        if (!_groups.TryGetValue(group, out var counter)) _groups[group] = counter = new BitCounter(_words);
        counter.Add(losses);
    }

    /// <summary>One anchor: its name (<c>all</c> or <c>trainer=NAME</c>), its majority losses as 64-bit words, and its weight.</summary>
    public sealed record AnchorVector(string Name, ulong[] Bits, long Errors, double Weight, int Members);

    /// <summary>
    /// The anchors with their weights: the majority of every look, and the majority of each group of two looks or more
    /// that is not every look. With K such groups the all-looks anchor weighs ½ and each group ½K; without, it weighs 1.
    /// </summary>
    public IReadOnlyList<AnchorVector> Anchors()
    {
        var groups = _groups.Where(g => g.Value.Members >= 2 && g.Value.Members < _all.Members).OrderBy(g => g.Key, StringComparer.Ordinal).ToList();
        var anchors = new List<AnchorVector>(groups.Count + 1);
        var allWeight = groups.Count == 0 ? 1.0 : 0.5;
        var majority = _all.Majority(_n);
        anchors.Add(new AnchorVector("all", majority, Count(majority), allWeight, _all.Members));
        foreach (var (name, counter) in groups)
        {
            var bits = counter.Majority(_n);
            anchors.Add(new AnchorVector($"trainer={name}", bits, Count(bits), 0.5 / groups.Count, counter.Members));
        }

        return anchors;
    }

    /// <summary>The selected look's counts against each anchor: what <see cref="ChainedBinomial.Bound"/> takes.</summary>
    public (List<ChainedBinomial.Anchor> Anchors, List<ChainedBinomial.Increment> Increments) Against(IReadOnlyList<AnchorVector> anchors, ReadOnlySpan<byte> selected) =>
        Against(anchors, Words(selected));

    /// <summary>The same, for a look given as 64-bit words.</summary>
    public (List<ChainedBinomial.Anchor> Anchors, List<ChainedBinomial.Increment> Increments) Against(IReadOnlyList<AnchorVector> anchors, ReadOnlySpan<ulong> look)
    {
        var a = new List<ChainedBinomial.Anchor>(anchors.Count);
        var d = new List<ChainedBinomial.Increment>(anchors.Count);
        foreach (var anchor in anchors)
        {
            long onlyLook = 0, onlyAnchor = 0;
            for (var w = 0; w < _words; w++)
            {
                onlyLook += BitOperations.PopCount(look[w] & ~anchor.Bits[w]);
                onlyAnchor += BitOperations.PopCount(anchor.Bits[w] & ~look[w]);
            }

            a.Add(new ChainedBinomial.Anchor(anchor.Errors, anchor.Weight));
            d.Add(new ChainedBinomial.Increment(onlyLook, onlyAnchor));
        }

        return (a, d);
    }

    private ulong[] Words(ReadOnlySpan<byte> losses)
    {
        if (losses.Length != (_n + 7) / 8)
        {
            throw AccountantException.BadInput($"a look's per-example losses hold {losses.Length} bytes, but the holdout's {_n} examples need {(_n + 7) / 8}; the look does not belong to this holdout.");
        }

        var words = new ulong[_words];
        Span<byte> chunk = stackalloc byte[8];
        for (var w = 0; w < _words; w++)
        {
            var start = 8 * w;
            var take = Math.Min(8, losses.Length - start);
            chunk.Clear();
            losses.Slice(start, take).CopyTo(chunk);
            words[w] = BinaryPrimitives.ReadUInt64LittleEndian(chunk);
        }

        var tail = _n % 64;
        if (tail != 0) words[^1] &= (1UL << tail) - 1;
        return words;
    }

    private static long Count(ulong[] bits)
    {
        long count = 0;
        foreach (var w in bits) count += BitOperations.PopCount(w);
        return count;
    }
}
