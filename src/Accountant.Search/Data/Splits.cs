namespace Accountant.Search.Data;

/// <summary>Row indices of the three splits.</summary>
public sealed record SplitIndices(IReadOnlyList<int> Training, IReadOnlyList<int> Validation, IReadOnlyList<int> Test);

/// <summary>
/// Seeded splits into training, validation (the holdout) and a sealed test set. Rows are shuffled first (files are often
/// sorted by class); for classification each class is split in the same proportions (stratified), so every class needs at
/// least one example in each split.
/// </summary>
public static class Splits
{
    public static SplitIndices Make(IReadOnlyList<string> labels, double validationFraction, double testFraction, int seed, bool stratify)
    {
        if (!(validationFraction > 0 && testFraction >= 0 && validationFraction + testFraction < 1))
        {
            throw AccountantException.BadArguments("--validation-fraction must be positive, --test-fraction non-negative, and together below 1 (defaults 0.2 and 0.2).");
        }

        var random = new Random(seed);
        var groups = stratify
            ? labels.Select((label, i) => (label, i)).GroupBy(p => p.label, StringComparer.Ordinal).OrderBy(g => g.Key, StringComparer.Ordinal).Select(g => g.Select(p => p.i).ToList()).ToList()
            : [Enumerable.Range(0, labels.Count).ToList()];
        var training = new List<int>();
        var validation = new List<int>();
        var test = new List<int>();
        foreach (var group in groups)
        {
            Shuffle(group, random);
            var v = (int)Math.Round(group.Count * validationFraction);
            var t = (int)Math.Round(group.Count * testFraction);
            var needed = testFraction > 0 ? 3 : 2;
            if (stratify && (group.Count < needed || v == 0 || (testFraction > 0 && t == 0) || group.Count - v - t < 1))
            {
                throw AccountantException.BadInput($"the class '{labels[group[0]]}' has only {group.Count} example(s), too few to appear in every split of a stratified split; merge or drop rare classes, or raise the split fractions.");
            }

            validation.AddRange(group.Take(v));
            test.AddRange(group.Skip(v).Take(t));
            training.AddRange(group.Skip(v + t));
        }

        // Shuffle again so that training rows are not grouped by class (halving trains on prefixes).
        Shuffle(training, random);
        return new SplitIndices(training, validation, test);
    }

    private static void Shuffle(List<int> list, Random random)
    {
        for (var i = list.Count - 1; i > 0; i--)
        {
            var j = random.Next(i + 1);
            (list[i], list[j]) = (list[j], list[i]);
        }
    }
}
