using Accountant.Search.Data;

namespace Accountant.Search.Tests;

/// <summary>
/// The streamed split: per-class counts decided from the first pass, rows assigned in file order by sequential selection.
/// The references are combinatorial facts of sampling without replacement (the hypergeometric distribution: each row of a
/// class of n with v validation rows is in validation with probability v/n, two given rows both with v(v − 1)/(n(n − 1)))
/// and the apportionment arithmetic written out beside each check.
/// </summary>
public sealed class SplitPlanTests
{
    private static readonly long[] Uncapped = [long.MaxValue, long.MaxValue, long.MaxValue];

    /// <summary>The parts a plan gives rows in file order (each row's class given), from a seed.</summary>
    private static List<Part> Assign(SplitPlan plan, IReadOnlyList<int> labels, ulong seed)
    {
        var draw = plan.Start(seed);
        return labels.Select(draw.Next).ToList();
    }

    [Fact]
    public void Splits_are_stratified_exact_shuffled_and_reproducible_from_the_seed()
    {
        // 1,000 rows sorted by class, 700 : 250 : 50, as files often are.
        var labels = Enumerable.Range(0, 1000).Select(i => i < 700 ? 0 : i < 950 ? 1 : 2).ToList();
        var plan = SplitPlan.Fractions([700, 250, 50], ["a", "b", "c"], 0.2, 0.2, Uncapped, stratify: true);
        var parts = Assign(plan, labels, 5);
        Assert.Equal(parts, Assign(plan, labels, 5));
        Assert.NotEqual(parts, Assign(plan, labels, 6));
        foreach (var (part, size) in new[] { (Part.Validation, 200), (Part.Test, 200), (Part.Training, 600) })
        {
            Assert.Equal(size, parts.Count(p => p == part));
            // Each class in the same proportion as in the whole file.
            Assert.Equal(0.70 * size, Enumerable.Range(0, 1000).Count(i => parts[i] == part && labels[i] == 0));
            Assert.Equal(0.05 * size, Enumerable.Range(0, 1000).Count(i => parts[i] == part && labels[i] == 2));
        }

        Assert.DoesNotContain(Part.LeftOut, parts);
        // Spread through the file: the validation rows of class "a" are not its first 140 rows.
        Assert.NotEqual(Enumerable.Range(0, 140), Enumerable.Range(0, 700).Where(i => parts[i] == Part.Validation));
        var rare = Assert.Throws<AccountantException>(() => SplitPlan.Fractions([700, 250, 1], ["a", "b", "rare"], 0.2, 0.2, Uncapped, stratify: true));
        Assert.Contains("'rare' has only 1 example", rare.Message);
    }

    [Fact]
    public void Every_assignment_with_the_planned_counts_is_equally_likely()
    {
        // One class of n = 20 rows, v = 4 to validation, t = 4 to test, over R = 20,000 seeds. Each row's share in
        // validation is v/n = 0.2 (SE = sqrt(0.2·0.8/R) = 0.00283); rows 0 and 19 together in validation:
        // v(v − 1)/(n(n − 1)) = 12/380 = 0.03158 (SE 0.00124). Every check at 4 SE (21 checks: a false alarm about 1 in 750 runs; the seeds are fixed, so a run is repeatable).
        const int n = 20, runs = 20_000;
        var plan = SplitPlan.Fractions([n], ["all"], 0.2, 0.2, Uncapped, stratify: false);
        var labels = new int[n];
        var inValidation = new int[n];
        var bothEnds = 0;
        for (var seed = 0; seed < runs; seed++)
        {
            var parts = Assign(plan, labels, (ulong)seed);
            Assert.Equal((4, 4, 12), (parts.Count(p => p == Part.Validation), parts.Count(p => p == Part.Test), parts.Count(p => p == Part.Training)));
            for (var i = 0; i < n; i++) if (parts[i] == Part.Validation) inValidation[i]++;
            if (parts[0] == Part.Validation && parts[^1] == Part.Validation) bothEnds++;
        }

        var se = Math.Sqrt(0.2 * 0.8 / runs);
        Assert.All(inValidation, count => Assert.InRange(count / (double)runs, 0.2 - 4 * se, 0.2 + 4 * se));
        var pair = 12.0 / 380;
        Assert.InRange(bothEnds / (double)runs, pair - 4 * Math.Sqrt(pair * (1 - pair) / runs), pair + 4 * Math.Sqrt(pair * (1 - pair) / runs));
    }

    [Fact]
    public void A_part_over_the_cap_keeps_a_proportional_sample_of_each_class_and_leaves_the_rest_out()
    {
        // 10,000 rows, 7,001 : 2,500 : 499; validation and test 0.2 each: validation 1,400 + 500 + 100 = 2,000 rows, capped
        // at 1,000. Shares 1,400·1,000/2,000 = 700, 250, 50 exactly; training 4,201 + 1,500 + 299 = 6,000 capped at 1,000:
        // shares 700.17, 250, 49.83 → floors 700, 250, 49, and the one row left goes to the largest remainder (0.83: class 2).
        var plan = SplitPlan.Fractions([7001, 2500, 499], ["a", "b", "c"], 0.2, 0.2, [1000, 1000, 1000], stratify: true);
        Assert.Equal((700, 250, 50), (plan.Count(0, Part.Validation), plan.Count(1, Part.Validation), plan.Count(2, Part.Validation)));
        Assert.Equal((700, 250, 50), (plan.Count(0, Part.Training), plan.Count(1, Part.Training), plan.Count(2, Part.Training)));
        Assert.Equal((1000L, 1000L, 1000L), (plan.Count(Part.Training), plan.Count(Part.Validation), plan.Count(Part.Test)));
        Assert.Equal((5000L, 1000L, 1000L), (plan.LeftOutBy(Part.Training), plan.LeftOutBy(Part.Validation), plan.LeftOutBy(Part.Test)));
        var labels = Enumerable.Range(0, 10_000).Select(i => i < 7001 ? 0 : i < 9501 ? 1 : 2).ToList();
        var parts = Assign(plan, labels, 3);
        Assert.Equal(7000, parts.Count(p => p == Part.LeftOut));
        Assert.Equal(50, Enumerable.Range(0, labels.Count).Count(i => parts[i] == Part.Training && labels[i] == 2));
    }
}
