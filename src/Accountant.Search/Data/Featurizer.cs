using System.Text.Json.Serialization;

namespace Accountant.Search.Data;

/// <summary>
/// Turns rows into sparse feature vectors, fitted on the training split only (so nothing of the holdout leaks in): numeric
/// columns as they are, missing values replaced by the training mean; a categorical column with at most
/// <see cref="MaxLevels"/> distinct training values one-hot over them, unseen and missing values sharing an "other" slot;
/// a column with more is hashed (Weinberger et al. 2009): each value goes to slot MurmurHash3_x86_32(UTF-8 of the value,
/// seed 0) mod 2^<see cref="HashBits"/>, missing values to one more slot, so every value keeps a slot of its own or shares
/// one with a few others, instead of all but the most frequent sharing one.
/// </summary>
public sealed class Featurizer
{
    public const int MaxLevels = 50;

    /// <summary>2^12 = 4,096 slots per hashed column: a 10,000-level column puts about 2.4 values in a slot.</summary>
    public const int DefaultHashBits = 12;

    public const uint HashSeed = 0;

    [JsonInclude] public List<string> Columns { get; private set; } = [];
    [JsonInclude] public List<bool> Numeric { get; private set; } = [];
    [JsonInclude] public List<double> Means { get; private set; } = [];
    [JsonInclude] public List<List<string>> Levels { get; private set; } = [];
    [JsonInclude] public List<bool> Hashed { get; private set; } = [];
    [JsonInclude] public int HashBits { get; private set; } = DefaultHashBits;

    /// <summary>The hashed columns and how many distinct values each had among the training rows (known only when fitted here).</summary>
    [JsonIgnore] public List<(string Column, int Values)> HashedColumns { get; } = [];

    [JsonIgnore] public int Width => Enumerable.Range(0, Columns.Count).Sum(SlotsOf);

    private int SlotsOf(int c) => Numeric[c] ? 1 : Hashed[c] ? (1 << HashBits) + 1 : Levels[c].Count + 1;

    internal static Featurizer Fit(RowStore training, IReadOnlyList<FeatureColumn> features, IReadOnlyList<Vocabulary?> vocabularies, int hashBits)
    {
        var featurizer = new Featurizer { HashBits = hashBits };
        int numeric = 0, categorical = 0;
        for (var c = 0; c < features.Count; c++)
        {
            featurizer.Columns.Add(features[c].Name);
            featurizer.Numeric.Add(features[c].Numeric);
            if (features[c].Numeric)
            {
                double sum = 0;
                long count = 0;
                for (var r = 0; r < training.Count; r++)
                {
                    var x = training.Number(numeric, r);
                    if (float.IsNaN(x)) continue;
                    sum += x;
                    count++;
                }

                featurizer.Means.Add(count == 0 ? 0.0 : sum / count);
                featurizer.Levels.Add([]);
                featurizer.Hashed.Add(false);
                numeric++;
                continue;
            }

            var values = vocabularies[c]!.Values;
            var counts = new int[values.Count];
            for (var r = 0; r < training.Count; r++)
            {
                var code = training.Code(categorical, r);
                if (code >= 0) counts[code]++;
            }

            var seen = Enumerable.Range(0, values.Count).Where(code => counts[code] > 0).ToList();
            var hashed = seen.Count > MaxLevels;
            featurizer.Means.Add(0.0);
            featurizer.Hashed.Add(hashed);
            featurizer.Levels.Add(hashed ? [] : seen.OrderByDescending(code => counts[code]).ThenBy(code => values[code], StringComparer.Ordinal).Select(code => values[code]).ToList());
            if (hashed) featurizer.HashedColumns.Add((features[c].Name, seen.Count));
            categorical++;
        }

        return featurizer;
    }

    /// <summary>The slot of each column and of each vocabulary code, for rows whose codes come from <paramref name="vocabularies"/>.</summary>
    internal Binding Bind(IReadOnlyList<Vocabulary?> vocabularies)
    {
        var offsets = new int[Columns.Count];
        var ordinals = new int[Columns.Count];
        var slots = new int[Columns.Count][];
        var missing = new int[Columns.Count];
        int offset = 0, numeric = 0, categorical = 0;
        for (var c = 0; c < Columns.Count; c++)
        {
            offsets[c] = offset;
            ordinals[c] = Numeric[c] ? numeric++ : categorical++;
            offset += SlotsOf(c);
            if (Numeric[c]) continue;
            var values = vocabularies[c]!.Values;
            if (Hashed[c])
            {
                var mask = (1u << HashBits) - 1;
                slots[c] = values.Select(v => (int)(Murmur3.Hash(v, HashSeed) & mask)).ToArray();
                missing[c] = 1 << HashBits;
            }
            else
            {
                var level = Levels[c].Select((v, i) => (v, i)).ToDictionary(p => p.v, p => p.i, StringComparer.Ordinal);
                slots[c] = values.Select(v => level.GetValueOrDefault(v, Levels[c].Count)).ToArray();
                missing[c] = Levels[c].Count;
            }
        }

        return new Binding(this, offsets, ordinals, slots, missing, offset);
    }

    /// <summary>Where each column's slots start, and which slot each stored value takes.</summary>
    internal sealed record Binding(Featurizer Featurizer, int[] Offsets, int[] Ordinals, int[][] Slots, int[] Missing, int Width)
    {
        /// <summary>Vectors at most this wide are made dense (the trainers' quickest path); wider ones (hashed columns) sparse.</summary>
        public const int DenseWidth = 512;

        public bool Dense => Width <= DenseWidth;

        /// <summary>One nonzero-or-numeric entry per column: the most a row's sparse vector holds.</summary>
        public int Entries => Offsets.Length;

        /// <summary>Row <paramref name="row"/> of <paramref name="store"/> as a dense vector of <see cref="Width"/> values.</summary>
        public void Transform(RowStore store, int row, float[] dense, float[] values, int[] indices)
        {
            Transform(store, row, values, indices);
            Array.Clear(dense);
            for (var c = 0; c < indices.Length; c++) dense[indices[c]] = values[c];
        }

        /// <summary>Row <paramref name="row"/> of <paramref name="store"/> as a sparse vector: ascending slots and their values.</summary>
        public void Transform(RowStore store, int row, float[] values, int[] indices)
        {
            var f = Featurizer;
            for (var c = 0; c < Offsets.Length; c++)
            {
                indices[c] = Offsets[c];
                if (f.Numeric[c])
                {
                    var x = store.Number(Ordinals[c], row);
                    values[c] = float.IsNaN(x) ? (float)f.Means[c] : x;
                }
                else
                {
                    var code = store.Code(Ordinals[c], row);
                    indices[c] += code < 0 ? Missing[c] : Slots[c][code];
                    values[c] = 1f;
                }
            }
        }
    }
}
