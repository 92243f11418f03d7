namespace Accountant.Comparisons;

/// <summary>
/// Holm's step-down adjustment (Holm 1979, Scand. J. Stat. 6:65): sort the m p-values, multiply the i-th smallest by
/// m − i + 1, and make the results non-decreasing in that order. Rejecting every hypothesis whose adjusted p-value is at
/// most α controls the family-wise error rate at α under any dependence between the tests.
/// </summary>
public static class Holm
{
    /// <summary>The adjusted p-values, in the order given. Each is at most 1 and at least its raw p-value.</summary>
    public static double[] Adjust(IReadOnlyList<double> pValues)
    {
        ArgumentNullException.ThrowIfNull(pValues);
        var m = pValues.Count;
        var order = Enumerable.Range(0, m).ToArray();
        foreach (var p in pValues)
        {
            if (!(p >= 0.0 && p <= 1.0))
            {
                throw new ArgumentOutOfRangeException(nameof(pValues), "p-values must lie in [0, 1]");
            }
        }

        // A stable sort keeps equal p-values in their given order, so the result does not depend on the sort.
        Array.Sort(order, (a, b) => pValues[a] != pValues[b] ? pValues[a].CompareTo(pValues[b]) : a.CompareTo(b));
        var adjusted = new double[m];
        var running = 0.0;
        for (var i = 0; i < m; i++)
        {
            var index = order[i];
            running = Math.Max(running, Math.Min(1.0, (m - i) * pValues[index]));
            adjusted[index] = running;
        }

        return adjusted;
    }
}
