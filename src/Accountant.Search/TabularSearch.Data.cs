using System.Buffers.Binary;
using System.Diagnostics;
using System.Globalization;
using Accountant.Bounds;
using Accountant.Ledger;
using Accountant.Randomness;
using Accountant.Search.Data;
using Microsoft.ML;
using Microsoft.ML.Data;

namespace Accountant.Search;

public sealed partial class TabularSearch
{
    /// <summary>What a load keeps: a search keeps the training and validation rows and the test rows' ids; unsealing keeps
    /// the validation rows' ids and the test rows.</summary>
    internal enum Purpose
    {
        Search,
        Unseal,
    }

    /// <summary>
    /// Everything read and split, ready for training. Every source is read twice, a record at a time: the first pass checks
    /// every row and counts the labels by class (<see cref="Survey"/>), the second assigns each row to its part by the
    /// seeded plan the counts allow (<see cref="SplitPlan"/>) and keeps only the parts this load needs, compactly
    /// (<see cref="RowStore"/>). So a file larger than memory is searched in a bounded working set, a malformed row anywhere
    /// fails the first pass before the ledger is touched, and the same file and seed always give the same parts.
    /// </summary>
    internal sealed class Prepared
    {
        public required TabularSearchOptions Options { get; init; }
        public required TaskKind Task { get; init; }
        public required Metric Metric { get; init; }
        public LossRange? LossRange { get; init; }
        public required List<string> Classes { get; init; }
        public required IReadOnlyList<FeatureColumn> Features { get; init; }
        public required List<Vocabulary?> Vocabularies { get; init; }
        public required Featurizer Featurizer { get; init; }
        public required Featurizer.Binding Binding { get; init; }
        public required RowStore Training { get; init; }

        /// <summary>The training rows in a seeded random order (halving trains on prefixes of it).</summary>
        public required int[] TrainingOrder { get; init; }
        public required RowStore Validation { get; init; }
        public required RowStore Test { get; init; }

        /// <summary>Rows of each part left out by the row cap: training, validation, test.</summary>
        public required long[] LeftOut { get; init; }

        /// <summary>The fingerprint of the sealed test rows' ids and labels (as a holdout's), or null when there are none.</summary>
        public string? TestFingerprint { get; init; }

        public string LabelText(RowStore store, int row) =>
            Task == TaskKind.Regression ? Cells.Canonical(store.Values[row]) : store.Classes[row] >= 0 ? Classes[store.Classes[row]] : "";

        public List<HoldoutExample> Examples(RowStore store) =>
            Enumerable.Range(0, store.Count).Select(r => new HoldoutExample(store.Id(r), LabelText(store, r))).ToList();

        public List<HoldoutExample> ValidationExamples() => Examples(Validation);

        /// <summary>
        /// The loss of row <paramref name="row"/> of a store, predicted as entry <paramref name="i"/>: 0/1 for classification;
        /// for regression the absolute error clipped to <paramref name="range"/>, as float32, as the ledger keeps it.
        /// </summary>
        public double Loss(LossRange? range, RowStore store, int row, Predicted predicted, int i)
        {
            if (Task != TaskKind.Regression) return predicted.Classes![i] == store.Classes[row] && store.Classes[row] >= 0 ? 0 : 1;
            return (float)range!.Value.Clip(Math.Abs((double)predicted.Values![i] - store.Values[row]));
        }

        /// <summary>The mean loss of predictions on rows of a store: <paramref name="order"/>'s first ones when given, else all in store order.</summary>
        public double Mean(LossRange? range, RowStore store, Predicted predicted, int[]? order = null)
        {
            double sum = 0;
            for (var i = 0; i < predicted.Count; i++) sum += Loss(range, store, order?[i] ?? i, predicted, i);
            return sum / predicted.Count;
        }

        private static string Describe(TaskKind task) => task switch
        {
            TaskKind.Binary => "binary classification",
            TaskKind.Multiclass => "multiclass classification",
            _ => "regression",
        };

        public static Prepared Load(TabularSearchOptions o, Action<string>? note, IProgress<SearchProgress>? progress, Featurizer? fitted = null, Purpose purpose = Purpose.Search)
        {
            var main = o.Data;
            var validationSource = o.Validation;
            var testSource = o.Test;
            if (validationSource is null && !(o.ValidationFraction > 0 && o.TestFraction >= 0 && o.ValidationFraction + o.TestFraction < 1))
            {
                throw AccountantException.BadArguments("--validation-fraction must be positive, --test-fraction non-negative, and together below 1 (defaults 0.2 and 0.2).");
            }

            if (validationSource is not null && !(o.TestFraction >= 0 && o.TestFraction < 1))
            {
                throw AccountantException.BadArguments("--test-fraction must be at least 0 and below 1 (default 0.2).");
            }

            for (var part = 0; part < 3; part++)
            {
                if (o.Caps[part] < 2) throw AccountantException.BadArguments($"{TabularSearchOptions.CapOptions[part]} must be at least 2 (defaults 1,000,000 training and 200,000 validation and test rows).");
            }

            if (o.HashBits is < 4 or > 20) throw AccountantException.BadArguments("--hash-bits must be between 4 and 20 (default 12: 4,096 slots per hashed column).");

            var clock = Stopwatch.StartNew();
            var sources = new List<RowSource> { main };
            if (validationSource is not null) sources.Add(validationSource);
            if (testSource is not null) sources.Add(testSource);
            Action<double> Reading(RowSource source, int pass) => fraction => progress?.Report(new SearchProgress(0, o.Looks, null, clock.Elapsed,
                $"reading {source.Name}, pass {pass} of 2 ({(pass == 1 ? "checking every row" : "splitting")})") { Reading = fraction });

            // Pass 1: every row of every source checked, the labels counted.
            var surveys = new List<Survey> { Survey.Of(main, o.Label, o.Ignore, o.IdColumn, null, Reading(main, 1)) };
            foreach (var extra in sources.Skip(1)) surveys.Add(Survey.Of(extra, o.Label, o.Ignore, o.IdColumn, surveys[0].Features, Reading(extra, 1)));
            var survey = surveys[0];
            var task = o.Task ?? survey.InferTask();
            if (o.Task is null)
            {
                note?.Invoke($"task inferred from the label column '{o.Label}': {Describe(task)} (give --task to choose)");
            }
            else if (task != TaskKind.Regression && survey.InferTask() == TaskKind.Regression)
            {
                note?.Invoke($"the label column '{o.Label}' looks continuous but is treated as classes, as --task asks");
            }

            var classes = new List<string>();
            if (task == TaskKind.Regression)
            {
                if (surveys.FirstOrDefault(s => !s.NumericLabels) is { } text)
                {
                    throw AccountantException.BadInput($"regression needs numeric labels, but '{o.Label}' has '{text.FirstText!.Value.Label}' ('{text.Source.Name}' line {text.FirstText.Value.Line}); use --task binary or multiclass for classes.");
                }
            }
            else
            {
                if (surveys.Any(s => s.ManyLabels))
                {
                    throw AccountantException.BadInput($"the label column '{o.Label}' has more than {Survey.MaxClasses:N0} distinct values, too many to be classes; use --task regression for a number to predict.");
                }

                classes = surveys.SelectMany(s => s.Labels.Select(l => l.Label)).Distinct().Order(StringComparer.Ordinal).ToList();
                if (task == TaskKind.Binary && classes.Count != 2)
                {
                    throw AccountantException.BadInput($"binary classification needs exactly two label values, but '{o.Label}' has {classes.Count}; use --task multiclass.");
                }
            }

            // The plan of each source, from its counts: the main file split by the fractions, a separate file wholly one part.
            var stratify = task != TaskKind.Regression;
            var index = classes.Select((c, i) => (c, i)).ToDictionary(p => p.c, p => p.i, StringComparer.Ordinal);
            List<long> Counts(Survey s)
            {
                if (!stratify) return [s.Rows];
                var counts = new long[classes.Count];
                foreach (var (label, count) in s.Labels) counts[index[label]] += count;
                return [.. counts];
            }

            var plans = new List<SplitPlan>
            {
                SplitPlan.Fractions(stratify ? Counts(survey) : [survey.Rows], stratify ? classes : ["(all rows)"],
                    validationSource is null ? o.ValidationFraction : 0, testSource is null ? o.TestFraction : 0, o.Caps, stratify),
            };
            if (validationSource is not null) plans.Add(SplitPlan.Whole(Counts(surveys[1]), Part.Validation, o.Caps));
            if (testSource is not null) plans.Add(SplitPlan.Whole(Counts(surveys[^1]), Part.Test, o.Caps));

            // Pass 2: each row to its part; only the parts this load needs are kept.
            var features = survey.Features;
            int numeric = features.Count(f => f.Numeric), categorical = features.Count - numeric;
            var vocabularies = features.Select(f => f.Numeric ? null : new Vocabulary()).ToList();
            var keepIds = o.IdColumn is not null;
            var search = purpose == Purpose.Search;
            var stores = new[]
            {
                new RowStore(numeric, categorical, keepIds: false, keepFeatures: search),
                new RowStore(numeric, categorical, keepIds, keepFeatures: search),
                new RowStore(numeric, categorical, keepIds, keepFeatures: !search),
            };
            var keep = new[] { search, true, true };
            var leftOut = new long[3];
            for (var s = 0; s < sources.Count; s++)
            {
                Split(sources[s], surveys[s], plans[s].Start(Xoshiro256.Mix((ulong)(uint)o.Seed) + (ulong)s), task, index, features, vocabularies, stores, keep, Reading(sources[s], 2));
                for (var part = 0; part < 3; part++) leftOut[part] += plans[s].LeftOutBy((Part)part);
            }

            var (training, validation, test) = (stores[0], stores[1], stores[2]);
            if (plans.Sum(p => p.Count(Part.Training)) < 2)
            {
                throw AccountantException.BadInput("fewer than two training rows remain after the split; give more data or lower the split fractions.");
            }

            if (keepIds && validation.Ids!.Distinct(StringComparer.Ordinal).Count() != validation.Count)
            {
                throw AccountantException.BadInput($"the validation rows repeat an id in '{o.IdColumn}'; ids must be unique (leave out --id-column to use line numbers).");
            }

            // Regression losses are clipped to [0, range of the training labels], declared from training data alone.
            LossRange? range = null;
            if (task == TaskKind.Regression && search)
            {
                var width = training.Values.Max() - training.Values.Min();
                range = new LossRange(0, width > 0 ? width : 1.0);
            }

            var featurizer = fitted ?? Featurizer.Fit(training, features, vocabularies, o.HashBits);
            if (!featurizer.Columns.SequenceEqual(features.Select(f => f.Name)) || !featurizer.Numeric.SequenceEqual(features.Select(f => f.Numeric)))
            {
                throw AccountantException.BadInput($"the feature columns of '{main.Name}' are not the ones the search was fitted on; the rows cannot be rebuilt from a changed file.");
            }

            foreach (var (column, values) in featurizer.HashedColumns)
            {
                note?.Invoke($"the column '{column}' has {values:N0} distinct values among the training rows, more than the {Featurizer.MaxLevels} one-hot levels: hashed into {1 << featurizer.HashBits:N0} slots (MurmurHash3, --hash-bits {featurizer.HashBits})");
            }

            var names = new[] { "training", "validation", "test" };
            for (var part = 0; part < 3; part++)
            {
                if (leftOut[part] > 0 && search)
                {
                    note?.Invoke($"the {names[part]} rows are capped at {o.Caps[part]:N0} ({TabularSearchOptions.CapOptions[part]}): a seeded sample{(stratify ? ", stratified by class," : "")} is kept and {leftOut[part]:N0} are left out of the search");
                }
            }

            // Halving trains on prefixes of the training rows, so they are put in a seeded random order (Fisher–Yates).
            var order = Enumerable.Range(0, training.Count).ToArray();
            var random = new Xoshiro256(Xoshiro256.Mix((ulong)(uint)o.Seed) ^ 0x0DE5);
            for (var i = order.Length - 1; i > 0; i--)
            {
                var j = (int)(random.NextUInt64() % (ulong)(i + 1));
                (order[i], order[j]) = (order[j], order[i]);
            }

            return new Prepared
            {
                Options = o, Task = task, Metric = task == TaskKind.Regression ? Metric.AbsoluteError : Metric.Error, LossRange = range,
                Classes = classes, Features = features, Vocabularies = vocabularies, Featurizer = featurizer, Binding = featurizer.Bind(vocabularies),
                Training = training, TrainingOrder = order, Validation = validation, Test = test, LeftOut = leftOut,
                TestFingerprint = test.Count == 0 ? null : Fingerprint.Compute(Sorted(test)),
            };

            List<HoldoutExample> Sorted(RowStore store) => Examples(store, classes, task).OrderBy(e => e.Id, StringComparer.Ordinal).ToList();
        }

        private static IEnumerable<HoldoutExample> Examples(RowStore store, List<string> classes, TaskKind task) =>
            Enumerable.Range(0, store.Count).Select(r => new HoldoutExample(store.Id(r),
                task == TaskKind.Regression ? Cells.Canonical(store.Values[r]) : classes[store.Classes[r]]));

        /// <summary>The second pass over one source: every row's part drawn in file order, the kept ones stored.</summary>
        private static void Split(RowSource source, Survey survey, SplitPlan.Draw draw, TaskKind task, Dictionary<string, int> index,
            IReadOnlyList<FeatureColumn> features, List<Vocabulary?> vocabularies, RowStore[] stores, bool[] keep, Action<double> read)
        {
            using var reader = source.Open();
            var labelColumn = reader.Column(survey.LabelName, "--label");
            var columns = features.Select(f => reader.Column(f.Name, "the same columns as the main data file")).ToArray();
            int? idColumn = survey.IdIndex is null ? null : reader.Column(survey.Header[survey.IdIndex.Value], "--id-column");
            var classOf = new Dictionary<string, int>(StringComparer.Ordinal);
            var byText = classOf.GetAlternateLookup<ReadOnlySpan<char>>();
            long rows = 0;
            while (reader.Read())
            {
                rows++;
                if (rows % Survey.ReportEvery == 0 && reader.Length > 0) read((double)reader.Position / reader.Length);
                if (rows > survey.Rows) throw Changed(source);
                var text = reader[labelColumn].Trim();
                int label;
                double value = 0;
                if (task == TaskKind.Regression)
                {
                    if (!Cells.TryNumber(text, out value)) throw Changed(source);
                    label = 0;
                }
                else if (!byText.TryGetValue(text, out label))
                {
                    if (!index.TryGetValue(Fingerprint.CanonicalLabel(text.ToString()), out label)) throw Changed(source);
                    classOf[text.ToString()] = label;
                }

                var part = (int)draw.Next(label);
                if (part == (int)Part.LeftOut || !keep[part]) continue;
                var store = stores[part];
                store.Lines.Add(reader.Line);
                store.Ids?.Add(reader[idColumn!.Value].Trim().ToString());
                if (task == TaskKind.Regression) store.Values.Add(value);
                else store.Classes.Add(label);
                if (!store.KeepFeatures) continue;
                int n = 0, k = 0;
                for (var c = 0; c < features.Count; c++)
                {
                    var cell = reader[columns[c]];
                    if (features[c].Numeric) store.AddNumber(n++, !Cells.IsMissing(cell) && Cells.TryNumber(cell, out var x) ? (float)x : float.NaN);
                    else store.AddCode(k++, vocabularies[c]!.Code(cell));
                }
            }

            if (rows != survey.Rows) throw Changed(source);
            if (rows >= Survey.ReportEvery && reader.Length > 0) read(1.0);
        }

        private static AccountantException Changed(RowSource source) =>
            AccountantException.BadInput($"'{source.Name}' changed while it was read (its rows differ between the two passes); search a file nothing is writing to.");

        /// <summary>Rows of another source with the same columns (fresh rows to score), kept whole, their values coded in this load's vocabularies.</summary>
        public RowStore Extra(RowSource source)
        {
            var o = Options;
            var survey = Survey.Of(source, o.Label, o.Ignore, o.IdColumn, Features);
            var counts = Task == TaskKind.Regression ? [survey.Rows] : Classes.Select(c => survey.Labels.Where(l => l.Label == c).Sum(l => l.Count)).ToList();
            if (Task != TaskKind.Regression && survey.Labels.Any(l => !Classes.Contains(l.Label)))
            {
                throw AccountantException.BadInput($"'{source.Name}' has labels the search never saw; score rows whose labels are among {string.Join(", ", Classes)}.");
            }

            var store = new RowStore(Features.Count(f => f.Numeric), Features.Count(f => !f.Numeric), keepIds: false, keepFeatures: true);
            var index = Classes.Select((c, i) => (c, i)).ToDictionary(p => p.c, p => p.i, StringComparer.Ordinal);
            var plan = SplitPlan.Whole(counts, Part.Validation, [long.MaxValue, long.MaxValue, long.MaxValue]);
            Split(source, survey, plan.Start(0), Task, index, Features, Vocabularies, [new RowStore(0, 0, false, false), store, new RowStore(0, 0, false, false)], [false, true, false], _ => { });
            return store;
        }
    }

    /// <summary>One row as ML.NET reads it: the sparse feature vector and the label in the task's type.</summary>
    private sealed class Row
    {
        public VBuffer<float> Features { get; set; }
        public float Regression { get; set; }
        public bool Binary { get; set; }
        public string Class { get; set; } = "";
    }

    /// <summary>Rows of a store, made one at a time as a cursor reads them (one row object and its buffers reused).</summary>
    private sealed class StoredRows(Prepared p, RowStore store, Featurizer.Binding binding, int[]? order) : IEnumerable<Row>
    {
        public IEnumerator<Row> GetEnumerator()
        {
            var row = new Row();
            var values = new float[binding.Entries];
            var indices = new int[binding.Entries];
            var dense = binding.Dense ? new float[binding.Width] : null;
            var count = order?.Length ?? store.Count;
            for (var i = 0; i < count; i++)
            {
                var r = order?[i] ?? i;
                if (dense is not null)
                {
                    binding.Transform(store, r, dense, values, indices);
                    row.Features = new VBuffer<float>(binding.Width, dense);
                }
                else
                {
                    binding.Transform(store, r, values, indices);
                    row.Features = new VBuffer<float>(binding.Width, values.Length, values, indices);
                }

                if (p.Task == TaskKind.Regression) row.Regression = (float)store.Values[r];
                else
                {
                    var label = store.Classes[r];
                    row.Binary = p.Task == TaskKind.Binary && label == 1;
                    row.Class = label >= 0 ? p.Classes[label] : "";
                }

                yield return row;
            }
        }

        System.Collections.IEnumerator System.Collections.IEnumerable.GetEnumerator() => GetEnumerator();
    }

    /// <summary>
    /// The ML.NET views of the rows. Multiclass labels become keys through a value-to-key map fitted on the training rows;
    /// predicted keys are read back through the key's own value annotations, so no ordering is assumed.
    /// </summary>
    internal sealed class Views
    {
        private readonly MLContext _ml;
        private readonly Prepared _prepared;
        private readonly ITransformer? _label;

        /// <summary>The views of a search's rows; without <paramref name="fit"/> (unsealing: no training rows), only <see cref="Build"/>, with no label column.</summary>
        public Views(MLContext ml, Prepared prepared, bool fit = true)
        {
            _ml = ml;
            _prepared = prepared;
            if (!fit) return;
            var raw = Raw(prepared.Training, prepared.Binding, prepared.TrainingOrder);
            IEstimator<ITransformer> label = prepared.Task switch
            {
                TaskKind.Binary => ml.Transforms.CopyColumns("Label", nameof(Row.Binary)),
                TaskKind.Multiclass => ml.Transforms.Conversion.MapValueToKey("Label", nameof(Row.Class)),
                _ => ml.Transforms.CopyColumns("Label", nameof(Row.Regression)),
            };
            _label = label.Fit(raw);
            Training = _label.Transform(raw);
            Validation = Build(prepared.Validation, prepared.Binding);
        }

        /// <summary>The training rows in their seeded order.</summary>
        public IDataView Training { get; } = null!;

        public IDataView Validation { get; } = null!;

        public IDataView Build(RowStore store, Featurizer.Binding binding) => _label is null ? Raw(store, binding, null) : _label.Transform(Raw(store, binding, null));

        private IDataView Raw(RowStore store, Featurizer.Binding binding, int[]? order)
        {
            var definition = SchemaDefinition.Create(typeof(Row));
            definition["Features"].ColumnType = new VectorDataViewType(NumberDataViewType.Single, binding.Width);
            return _ml.Data.LoadFromEnumerable(new StoredRows(_prepared, store, binding, order), definition);
        }
    }

    /// <summary>A model's predictions on a view's rows, in their order: class indices (−1 for none), or numbers for regression.</summary>
    internal sealed record Predicted(int[]? Classes, float[]? Values)
    {
        public int Count => Classes?.Length ?? Values!.Length;
    }

    /// <summary>The prepared rows with their ML.NET views: what a model is trained on and scored with.</summary>
    internal sealed class Fitted
    {
        private readonly int[] _rank;

        public Fitted(MLContext ml, Prepared prepared)
        {
            P = prepared;
            Views = new Views(ml, prepared);
            // The holdout keeps its examples in ordinal id order; per-example losses are written in that order.
            var ids = Enumerable.Range(0, prepared.Validation.Count).Select(prepared.Validation.Id).ToArray();
            var sorted = Enumerable.Range(0, ids.Length).ToArray();
            Array.Sort(sorted, (a, b) => string.CompareOrdinal(ids[a], ids[b]));
            _rank = new int[sorted.Length];
            for (var i = 0; i < sorted.Length; i++) _rank[sorted[i]] = i;
        }

        public Prepared P { get; }

        public Views Views { get; }

        /// <summary>The per-example losses of predictions on the validation rows, in the holdout's id order: a bitset for 0/1 losses, float32 otherwise.</summary>
        public byte[] Losses(Predicted predicted)
        {
            var store = P.Validation;
            if (P.Task != TaskKind.Regression)
            {
                var bits = new byte[(store.Count + 7) / 8];
                for (var i = 0; i < store.Count; i++)
                {
                    if (P.Loss(null, store, i, predicted, i) != 0) bits[_rank[i] >> 3] |= (byte)(1 << (_rank[i] & 7));
                }

                return bits;
            }

            var bytes = new byte[4 * store.Count];
            for (var i = 0; i < store.Count; i++) BinaryPrimitives.WriteSingleLittleEndian(bytes.AsSpan(4 * _rank[i], 4), (float)P.Loss(P.LossRange, store, i, predicted, i));
            return bytes;
        }

        public (double Score, int Rows) Score(MLContext ml, ITransformer model, RowSource source)
        {
            var store = P.Extra(source);
            var predicted = Predict(P, model, Views.Build(store, P.Featurizer.Bind(P.Vocabularies)));
            return (P.Mean(P.LossRange, store, predicted), store.Count);
        }

        /// <summary>The model's predictions, in the order of the view's rows.</summary>
        public static Predicted Predict(Prepared p, ITransformer model, IDataView view)
        {
            var scored = model.Transform(view);
            var column = p.Task == TaskKind.Regression ? "Score" : "PredictedLabel";
            using var cursor = scored.GetRowCursor([scored.Schema[column]]);
            if (p.Task == TaskKind.Regression)
            {
                var values = new List<float>();
                var getter = cursor.GetGetter<float>(scored.Schema[column]);
                float value = 0;
                while (cursor.MoveNext())
                {
                    getter(ref value);
                    values.Add(value);
                }

                return new Predicted(null, [.. values]);
            }

            var classes = new List<int>();
            if (p.Task == TaskKind.Binary)
            {
                var getter = cursor.GetGetter<bool>(scored.Schema[column]);
                var value = false;
                while (cursor.MoveNext())
                {
                    getter(ref value);
                    classes.Add(value ? 1 : 0);
                }

                return new Predicted([.. classes], null);
            }

            VBuffer<ReadOnlyMemory<char>> names = default;
            scored.Schema[column].GetKeyValues(ref names);
            var index = names.DenseValues().Select(v => p.Classes.IndexOf(v.ToString())).ToArray();
            var keys = cursor.GetGetter<uint>(scored.Schema[column]);
            uint key = 0;
            while (cursor.MoveNext())
            {
                keys(ref key);
                // Keys are 1-based; 0 would be "missing", which a trained classifier does not predict: it counts as an error.
                classes.Add(key >= 1 && key <= index.Length ? index[key - 1] : -1);
            }

            return new Predicted([.. classes], null);
        }
    }
}
