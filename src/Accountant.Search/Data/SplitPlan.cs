using Accountant.Randomness;

namespace Accountant.Search.Data;

/// <summary>Where a row goes.</summary>
internal enum Part
{
    Training = 0,
    Validation = 1,
    Test = 2,
    /// <summary>Left out: beyond a part's row cap (<c>--max-training-rows</c> and the others).</summary>
    LeftOut = 3,
}

/// <summary>
/// How many rows of each class of one source go to each part, decided from the class counts alone (the first pass), so
/// that the second pass can assign every row as it streams by: exact, seeded, stratified splits without holding the rows.
/// Per class, the validation part gets round(n·v) rows and the test part round(n·t), the rest training; a part with more
/// than the cap keeps a proportional share of each class (largest remainders), and the rest are left out.
/// </summary>
internal sealed class SplitPlan
{
    private readonly long[][] _quotas; // [class][part]
    private readonly long[] _capped; // [part]: rows the cap left out

    private SplitPlan(long[][] quotas, long[] capped) => (_quotas, _capped) = (quotas, capped);

    public long Count(Part part) => _quotas.Sum(q => q[(int)part]);

    /// <summary>How many rows the cap took from a part (they are in <see cref="Part.LeftOut"/>).</summary>
    public long LeftOutBy(Part part) => _capped[(int)part];

    public long Count(int label, Part part) => _quotas[label][(int)part];

    /// <summary>
    /// Splits by fractions. With <paramref name="stratify"/>, each class is split on its own and must give every part
    /// that gets rows at least one; without, <paramref name="counts"/> has one entry (all rows).
    /// </summary>
    public static SplitPlan Fractions(IReadOnlyList<long> counts, IReadOnlyList<string> names, double validation, double test, IReadOnlyList<long> caps, bool stratify)
    {
        var quotas = new long[counts.Count][];
        for (var c = 0; c < counts.Count; c++)
        {
            var n = counts[c];
            var v = (long)Math.Round(n * validation);
            var t = (long)Math.Round(n * test);
            if (stratify && (n < (validation > 0 ? 1 : 0) + (test > 0 ? 1 : 0) + 1 || (validation > 0 && v == 0) || (test > 0 && t == 0) || n - v - t < 1))
            {
                throw AccountantException.BadInput($"the class '{names[c]}' has only {n} example(s), too few to appear in every split of a stratified split; merge or drop rare classes, or raise the split fractions.");
            }

            if (!stratify && validation > 0 && v == 0)
            {
                throw AccountantException.BadInput($"{n} row(s) leave no validation row at --validation-fraction {validation.ToString(System.Globalization.CultureInfo.InvariantCulture)}; give more data or raise the fraction.");
            }

            quotas[c] = [Math.Max(0, n - v - t), v, t, 0];
        }

        return Capped(quotas, caps);
    }

    /// <summary>Every row of a source to one part (a separate validation or test file), capped.</summary>
    public static SplitPlan Whole(IReadOnlyList<long> counts, Part part, IReadOnlyList<long> caps)
    {
        var quotas = counts.Select(n => { var q = new long[4]; q[(int)part] = n; return q; }).ToArray();
        return Capped(quotas, caps);
    }

    /// <summary>Caps each part (training, validation, test: <paramref name="caps"/> in that order).</summary>
    private static SplitPlan Capped(long[][] quotas, IReadOnlyList<long> caps)
    {
        var capped = new long[3];
        foreach (var part in new[] { Part.Training, Part.Validation, Part.Test })
        {
            var p = (int)part;
            var cap = caps[p];
            var total = quotas.Sum(q => q[p]);
            if (total <= cap) continue;
            // Hamilton's largest-remainder apportionment of the cap over the classes, in proportion to their rows.
            var kept = quotas.Select(q => (long)((double)q[p] * cap / total)).ToArray();
            var order = Enumerable.Range(0, quotas.Length).OrderByDescending(c => (double)quotas[c][p] * cap / total - kept[c]).ThenBy(c => c).ToList();
            for (var i = 0; kept.Sum() < cap; i++) kept[order[i % order.Count]]++;
            for (var c = 0; c < quotas.Length; c++)
            {
                quotas[c][(int)Part.LeftOut] += quotas[c][p] - kept[c];
                quotas[c][p] = kept[c];
            }

            capped[p] = total - cap;
        }

        return new SplitPlan(quotas, capped);
    }

    /// <summary>The assignment of rows in file order, from <paramref name="seed"/>: one seeded stream per class.</summary>
    public Draw Start(ulong seed) => new(_quotas, seed);

    /// <summary>
    /// Sequential selection (Fan, Muller &amp; Rezucha 1962; Knuth, TAOCP vol. 2, 3.4.2, Algorithm S, for several parts at once):
    /// the i-th remaining row of a class goes to a part with probability (rows that part still needs) / (rows of the class
    /// still to come), so every assignment with the planned counts is equally likely and the counts come out exactly.
    /// </summary>
    internal sealed class Draw
    {
        private readonly long[][] _left;
        private readonly Xoshiro256[] _streams;

        public Draw(long[][] quotas, ulong seed)
        {
            _left = quotas.Select(q => (long[])q.Clone()).ToArray();
            _streams = Enumerable.Range(0, quotas.Length).Select(c => new Xoshiro256(Xoshiro256.Mix(seed) ^ Xoshiro256.Mix((ulong)c + 0x5EED))).ToArray();
        }

        public Part Next(int label)
        {
            var left = _left[label];
            var remaining = left[0] + left[1] + left[2] + left[3];
            if (remaining <= 0)
            {
                throw new InvalidOperationException("more rows of a class than the first pass counted");
            }

            var u = Below(ref _streams[label], (ulong)remaining);
            var part = 0;
            for (var acc = (ulong)left[0]; u >= acc; acc += (ulong)left[++part])
            {
            }

            left[part]--;
            return (Part)part;
        }

        /// <summary>A uniform integer in [0, n): Lemire's multiply-shift with rejection (ACM TOMACS 29:3, 2019), unbiased.</summary>
        private static ulong Below(ref Xoshiro256 random, ulong n)
        {
            var high = Math.BigMul(random.NextUInt64(), n, out var low);
            if (low < n)
            {
                var threshold = (0 - n) % n;
                while (low < threshold) high = Math.BigMul(random.NextUInt64(), n, out low);
            }

            return high;
        }
    }
}
