using System.Text.Json.Serialization;

namespace Accountant.Search.Data;

/// <summary>
/// Turns rows into feature vectors, fitted on the training split only (so nothing of the holdout leaks in): numeric
/// columns with missing values replaced by the training mean; categorical columns one-hot over their most frequent
/// training values (up to <see cref="MaxLevels"/>), with the rest, unseen and missing values sharing an "other" slot.
/// </summary>
public sealed class Featurizer
{
    public const int MaxLevels = 50;

    [JsonInclude] public List<string> Columns { get; private set; } = [];
    [JsonInclude] public List<bool> Numeric { get; private set; } = [];
    [JsonInclude] public List<double> Means { get; private set; } = [];
    [JsonInclude] public List<List<string>> Levels { get; private set; } = [];

    [JsonIgnore] public int Width => Numeric.Select((numeric, i) => numeric ? 1 : Levels[i].Count + 1).Sum();

    public static Featurizer Fit(TabularData data, IReadOnlyList<int> trainingRows)
    {
        var featurizer = new Featurizer();
        foreach (var column in data.Features)
        {
            featurizer.Columns.Add(column.Name);
            featurizer.Numeric.Add(column.Numeric);
            if (column.Numeric)
            {
                var values = trainingRows.Select(r => data.Table.Rows[r][column.Index]).Where(v => !TabularData.IsMissing(v))
                    .Select(v => TabularData.TryNumber(v, out var x) ? x : 0.0).ToList();
                featurizer.Means.Add(values.Count == 0 ? 0.0 : values.Average());
                featurizer.Levels.Add([]);
            }
            else
            {
                featurizer.Means.Add(0.0);
                featurizer.Levels.Add(trainingRows.Select(r => data.Table.Rows[r][column.Index].Trim()).Where(v => !TabularData.IsMissing(v))
                    .GroupBy(v => v, StringComparer.Ordinal).OrderByDescending(g => g.Count()).ThenBy(g => g.Key, StringComparer.Ordinal)
                    .Take(MaxLevels).Select(g => g.Key).ToList());
            }
        }

        return featurizer;
    }

    public float[] Transform(TabularData data, int row)
    {
        var vector = new float[Width];
        var offset = 0;
        for (var c = 0; c < Columns.Count; c++)
        {
            var value = data.Table.Rows[row][data.Features[c].Index];
            if (Numeric[c])
            {
                vector[offset++] = (float)(!TabularData.IsMissing(value) && TabularData.TryNumber(value, out var x) ? x : Means[c]);
            }
            else
            {
                var level = Levels[c].IndexOf(value.Trim());
                vector[offset + (level < 0 ? Levels[c].Count : level)] = 1f;
                offset += Levels[c].Count + 1;
            }
        }

        return vector;
    }
}
