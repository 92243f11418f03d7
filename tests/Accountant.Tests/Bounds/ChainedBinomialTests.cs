using Accountant.Bounds;
using Accountant.Comparisons;

namespace Accountant.Tests.Bounds;

/// <summary>
/// chained-binomial: each stage is a Clopper–Pearson limit, so its values are checked against SciPy 1.10.1
/// (scipy.stats.beta.ppf: upper limit beta.ppf(1 − a, k + 1, n − k), lower limit beta.ppf(a, k, n − k + 1)), computed
/// offline with the same allocation of δ: 0.8·δ·w to an anchor of weight w, 0.2·δ/(2·M·A) to each increment limit.
/// </summary>
public class ChainedBinomialTests
{
    [Fact]
    public void One_anchor_matches_scipy()
    {
        // n = 10,000, M = 1,000 looks, one anchor with 1,800 errors; the selected look errs alone on 210 examples and is right
        // alone on 5. SciPy: U(1800; 0.04) + U(210; 5e-6) − L(5; 5e-6) = 0.18685225245421655 + 0.02804241766521305
        // − 2.359041200748201e-05 = 0.2148710797074221.
        var result = ChainedBinomial.Bound(10_000, 1000, [new(1800, 1.0)], [new(210, 5)], 0.05);
        Assert.Equal(0.2148710797074221, result.Interval.Upper, 1e-10);
        Assert.Equal(0.0, result.Interval.Lower);
    }

    [Fact]
    public void Two_anchors_two_sided_match_scipy_and_the_better_anchor_gives_each_end()
    {
        // n = 2,000, M = 50, two anchors of weight ½, two-sided (δ/2 a side). SciPy: upper ends 0.24953248426748764 and
        // 0.2469626765272506 (the second is smaller), lower ends 0.16952077227416265 and 0.15909470046476826 (the first is larger).
        var result = ChainedBinomial.Bound(2000, 50, [new(400, 0.5), new(380, 0.5)], [new(30, 12), new(45, 20)], 0.05, Sidedness.TwoSided);
        Assert.Equal(0.2469626765272506, result.Interval.Upper, 1e-10);
        Assert.Equal(0.16952077227416265, result.Interval.Lower, 1e-10);
        Assert.Equal((1, 0), (result.UpperAnchor, result.LowerAnchor));
    }

    [Fact]
    public void Identical_looks_cost_less_than_the_union_and_their_effective_count_matches_scipy()
    {
        // Ten looks that err on the same 150 of 1,000 examples: the anchor is every look, the increments are zero.
        // SciPy: U(150; 0.04) + U(0; 0.0005) = 0.17868713210283155, below the union bound U(150; 0.005) = 0.18125401349561235;
        // the union over M' looks gives the same limit at M' = 5.609770103291479 (scipy.optimize.brentq on ln M').
        var chained = ChainedBinomial.Bound(1000, 10, [new(150, 1.0)], [new(0, 0)], 0.05).Interval.Upper;
        Assert.Equal(0.17868713210283155, chained, 1e-10);
        Assert.Equal(0.18125401349561235, BinomialUnion.Bound(150, 1000, 10, 0.05).Upper, 1e-10);
        Assert.Equal(5.609770103291479, ChainedBinomial.EffectiveComparisons(150, 1000, 10, chained, 0.05)!.Value, 1e-6);
        // A bound above the union's has no effective count below M; one at or below a single look's is counted as 1.
        Assert.Null(ChainedBinomial.EffectiveComparisons(150, 1000, 10, 0.19, 0.05));
        Assert.Equal(1.0, ChainedBinomial.EffectiveComparisons(150, 1000, 10, 0.16, 0.05));
    }

    [Fact]
    public void The_bound_is_never_below_the_observed_error_and_grows_with_the_looks_and_the_confidence()
    {
        var random = new Random(5);
        for (var trial = 0; trial < 300; trial++)
        {
            var n = random.Next(50, 5000);
            var anchorErrors = random.Next(0, n + 1);
            var onlyAnchor = random.Next(0, anchorErrors + 1);
            var onlyLook = random.Next(0, n - anchorErrors + 1);
            var observed = (anchorErrors + onlyLook - onlyAnchor) / (double)n;
            var looks = random.Next(2, 5000);
            var bound = ChainedBinomial.Bound(n, looks, [new(anchorErrors, 1.0)], [new(onlyLook, onlyAnchor)], 0.05).Interval.Upper;
            Assert.True(bound >= observed - 1e-12, $"n {n}: bound {bound} below observed {observed}");
            Assert.True(ChainedBinomial.Bound(n, looks * 10, [new(anchorErrors, 1.0)], [new(onlyLook, onlyAnchor)], 0.05).Interval.Upper >= bound);
            Assert.True(ChainedBinomial.Bound(n, looks, [new(anchorErrors, 1.0)], [new(onlyLook, onlyAnchor)], 0.01).Interval.Upper >= bound);
        }
    }

    [Fact]
    public void Bad_anchor_lists_are_refused()
    {
        Assert.Throws<ArgumentException>(() => ChainedBinomial.Bound(100, 5, [], [], 0.05));
        Assert.Throws<ArgumentException>(() => ChainedBinomial.Bound(100, 5, [new(10, 0.6), new(10, 0.6)], [new(1, 1), new(1, 1)], 0.05));
        Assert.Throws<ArgumentException>(() => ChainedBinomial.Bound(100, 5, [new(10, 1.0)], [new(1, 1), new(1, 1)], 0.05));
    }
}

/// <summary>The majority-vote anchors against their definition, computed example by example.</summary>
public class MajorityAnchorsTests
{
    [Theory]
    [InlineData(1, 64, 3)]
    [InlineData(4, 130, 7)]
    [InlineData(9, 1001, 12)]
    [InlineData(30, 517, 2)]
    public void Anchors_are_the_majority_of_their_looks_on_each_example(int looks, int n, int seed)
    {
        var random = new Random(seed);
        var rows = Enumerable.Range(0, looks).Select(_ => Enumerable.Range(0, n).Select(_ => random.NextDouble() < 0.3 + 0.4 * random.NextDouble()).ToArray()).ToList();
        var groups = Enumerable.Range(0, looks).Select(k => k % 3 == 0 ? "a" : k % 3 == 1 ? "b" : null).ToList();
        var anchors = new MajorityAnchors(n);
        for (var k = 0; k < looks; k++) anchors.Add(Pack(rows[k]), groups[k]);
        var vectors = anchors.Anchors();
        bool Majority(IEnumerable<int> members, int i) => members.Count(k => rows[k][i]) * 2 > members.Count();
        var all = Enumerable.Range(0, looks).ToList();
        var expected = new List<(string Name, List<int> Members)> { ("all", all) };
        foreach (var g in new[] { "a", "b" })
        {
            var members = all.Where(k => groups[k] == g).ToList();
            if (members.Count >= 2 && members.Count < looks) expected.Add(($"trainer={g}", members));
        }

        Assert.Equal(expected.Select(e => e.Name), vectors.Select(v => v.Name));
        Assert.Equal(1.0, vectors.Sum(v => v.Weight), 12);
        for (var a = 0; a < expected.Count; a++)
        {
            var bits = Enumerable.Range(0, n).Select(i => Majority(expected[a].Members, i)).ToArray();
            Assert.Equal(bits.Count(b => b), vectors[a].Errors);
            var (counts, increments) = anchors.Against(vectors, Pack(rows[0]));
            Assert.Equal(Enumerable.Range(0, n).Count(i => rows[0][i] && !bits[i]), increments[a].OnlyLook);
            Assert.Equal(Enumerable.Range(0, n).Count(i => !rows[0][i] && bits[i]), increments[a].OnlyAnchor);
            Assert.Equal(vectors[a].Errors, counts[a].Errors);
        }
    }

    [Fact]
    public void Losses_of_another_size_are_refused_as_bad_input()
    {
        var anchors = new MajorityAnchors(100);
        var error = Assert.Throws<AccountantException>(() => anchors.Add(new byte[12], null));
        Assert.Equal(ErrorKind.BadInput, error.Kind);
    }

    private static byte[] Pack(bool[] losses)
    {
        var bytes = new byte[(losses.Length + 7) / 8];
        for (var i = 0; i < losses.Length; i++) if (losses[i]) bytes[i >> 3] |= (byte)(1 << (i & 7));
        return bytes;
    }
}
