using System.Diagnostics;
using System.Globalization;
using System.Text.Json;
using Accountant.Bounds;
using Accountant.Guards;
using Accountant.Ledger;
using Accountant.Search.Data;
using Accountant.Search.Trainers;
using Accountant.Statements;
using Microsoft.ML;
using Microsoft.ML.Data;

namespace Accountant.Search;

/// <summary>What <c>accountant search</c> was asked to do.</summary>
public sealed record TabularSearchOptions
{
    public required string DataPath { get; init; }
    public required string Label { get; init; }
    public TaskKind? Task { get; init; }
    public IReadOnlyList<string> Ignore { get; init; } = [];
    public string? IdColumn { get; init; }
    public int Seed { get; init; } = 1;
    public double ValidationFraction { get; init; } = 0.2;
    public double TestFraction { get; init; } = 0.2;
    public string? ValidationPath { get; init; }
    public string? TestPath { get; init; }
    public string? SpacePath { get; init; }
    /// <summary>random, grid, refine or halving.</summary>
    public string Strategy { get; init; } = "random";
    public int Looks { get; init; } = 20;
    public GuardSpec? Guard { get; init; }
    public string? HoldoutName { get; init; }
    /// <summary>Where the selected model goes; by default beside the ledger, named after the holdout.</summary>
    public string? ModelPath { get; init; }
    public StatementOptions Statement { get; init; } = new();
    /// <summary>The name of a shared plan to work through with other workers (see <see cref="TabularSearch"/>'s shared part); null for a search of one's own.</summary>
    public string? Share { get; init; }
    /// <summary>How long a shared worker's claim lasts unless renewed; the worker renews it every third of this while it trains.</summary>
    public TimeSpan Lease { get; init; } = TimeSpan.FromMinutes(2);

    /// <summary>Rows made in memory in place of <see cref="DataPath"/>'s file (the demo's invented days); <see cref="DataPath"/> then only names them.</summary>
    public RowSource? Rows { get; init; }

    /// <summary>Validation rows made in memory in place of <see cref="ValidationPath"/>'s file.</summary>
    public RowSource? ValidationRows { get; init; }

    /// <summary>The label grouping this search's looks in the ledger; by default search-STRATEGY-seedSEED (the share name in a shared search).</summary>
    public string? SearchLabel { get; init; }

    /// <summary>With <see cref="Share"/>: only the closing step, saving the selected model of a shared search whose tasks are all done.</summary>
    public bool Finish { get; init; }

    internal RowSource Data => Rows ?? RowSource.File(DataPath);

    internal RowSource? Validation => ValidationRows ?? (ValidationPath is null ? null : RowSource.File(ValidationPath));

    internal RowSource? Test => TestPath is null ? null : RowSource.File(TestPath);

    /// <summary>Whether every source is a file, so that the sealed test set can be rebuilt from the record later.</summary>
    internal bool FromFiles => Rows is null && ValidationRows is null;
}

/// <summary>What a search did, and where it left the selected model.</summary>
public sealed record TabularSearchOutcome(
    Statement Statement, SearchOutcome Search, TaskKind Task, bool TaskInferred, string ModelPath, string RecordPath,
    int TrainingRows, int ValidationRows, int TestRows)
{
    /// <summary>Whether this process saved the selected model and its record (a shared worker saves them only when it trained the selected look).</summary>
    public bool ModelSaved { get; init; }

    /// <summary>This worker's name in a shared search; null otherwise.</summary>
    public string? SharedWorker { get; init; }

    /// <summary>In a shared search, the worker whose look was selected; null otherwise.</summary>
    public string? SelectedBy { get; init; }

    /// <summary>In a shared search, the worker that saved the selected model and its record; null while none has.</summary>
    public string? SavedBy { get; init; }

    /// <summary>In a shared search, where the record unseal reads was written (on <see cref="SavedBy"/>'s machine).</summary>
    public string? SavedAt { get; init; }

    /// <summary>The selected look's model when this process holds it (it trained that look, or retrained it to save it); null otherwise.</summary>
    public SelectedModel? Selected { get; init; }
}

/// <summary>The selected look's model, with what it needs to score further rows (the featurizer fitted on the training rows).</summary>
public sealed class SelectedModel
{
    private readonly MLContext _ml;
    private readonly TabularSearch.Fitted _fitted;

    internal SelectedModel(MLContext ml, TabularSearch.Fitted fitted, ITransformer model, int look) => (_ml, _fitted, Model, Look) = (ml, fitted, model, look);

    public ITransformer Model { get; }

    /// <summary>The number of the look this model was scored as.</summary>
    public int Look { get; }

    /// <summary>
    /// The model's score on other rows with the same columns, in the holdout's metric (error for classification, absolute
    /// error clipped to the holdout's loss range for regression), and how many rows were scored.
    /// </summary>
    public (double Score, int Rows) Score(RowSource rows) => _fitted.Score(_ml, Model, rows);
}

/// <summary>
/// A hyperparameter search on rows of the user's (a CSV file) or rows made in memory (the demo's invented days): split (or
/// separate files), featurize on the training rows only, register the validation rows as the holdout, try configurations by
/// a strategy, record every look (every stage of halving too), and keep the selected model with a record of how to rebuild
/// its sealed test set. This is the one runner: the demo, a search of one's own and a shared worker all train, predict,
/// record and keep the best through it.
/// </summary>
public sealed partial class TabularSearch(Bookkeeper book, string ledgerPath)
{
    private readonly MLContext _ml = new(seed: 1);

    public static string DefaultHoldoutName(string dataPath) => Path.GetFileNameWithoutExtension(dataPath) + "-validation";

    /// <summary>
    /// Where a search leaves its record and selected model: beside a ledger file, or the current directory when the ledger
    /// is not a file of this machine (a server database).
    /// </summary>
    public static string FolderFor(ILedgerStore store) =>
        store is SqliteLedgerStore ? Path.GetDirectoryName(Path.GetFullPath(store.Location)) ?? "." : Directory.GetCurrentDirectory();

    /// <summary>The record a search leaves (see <see cref="FolderFor"/>), and unseal reads.</summary>
    public static string RecordPathFor(ILedgerStore store, string holdout) => Path.Combine(FolderFor(store), Safe(holdout) + ".search.json");

    private string Folder => book.Store is SqliteLedgerStore ? Path.GetDirectoryName(Path.GetFullPath(ledgerPath)) ?? "." : FolderFor(book.Store);

    private static string Safe(string name) => string.Concat(name.Select(c => char.IsLetterOrDigit(c) || c is '-' or '_' or '.' ? c : '_'));

    public TabularSearchOutcome Run(TabularSearchOptions options, IProgress<SearchProgress>? progress = null, Action<string>? note = null, CancellationToken cancel = default)
    {
        if (options.Looks < 1) throw AccountantException.BadArguments("--looks must be at least 1.");
        if (options.Share is not null && !options.FromFiles)
        {
            throw AccountantException.BadArguments("a shared search reads its rows from a file every worker has; rows made in memory cannot be shared.");
        }

        CheckFinish(options);
        var prepared = Prepared.Load(options, note);
        var task = prepared.Task;
        var space = options.SpacePath is { } spacePath ? SpaceFile.Read(spacePath, task) : TrainerCatalog.DefaultSpace(task);
        var name = options.HoldoutName ?? DefaultHoldoutName(options.DataPath);
        if (options.Share is not null) return RunShared(options, prepared, space, name, progress, note, cancel);
        var holdout = book.EnsureHoldout(name, prepared.ValidationExamples(), prepared.Metric, prepared.LossRange);
        var fitted = new Fitted(_ml, prepared);
        var runner = new Runner(book, holdout, fitted, options.Guard, options.SearchLabel ?? $"search-{options.Strategy}-seed{options.Seed}", options.Seed);
        var outcome = options.Strategy switch
        {
            "halving" => runner.Halving(space, options.Looks, options.Seed, progress, cancel),
            "grid" => runner.Plain(new GridStrategy(space, options.Looks), Math.Min(options.Looks, new GridStrategy(space, options.Looks).Count), progress, cancel),
            "refine" => runner.Plain(new RefineStrategy(space, options.Looks, options.Seed, holdout.Metric.HigherIsBetter()), options.Looks, progress, cancel),
            "random" => runner.Plain(new RandomStrategy(space, options.Looks, options.Seed), options.Looks, progress, cancel),
            _ => throw AccountantException.BadArguments($"unknown strategy '{options.Strategy}'; use random, grid, refine or halving."),
        };

        var statement = book.Statement(holdout.Name, options.Statement);
        ITransformer? model = null;
        if (statement.Best is { } best && !runner.Models.TryGetValue(best.Number, out model) && best.Stage is null && !outcome.Cancelled)
        {
            // The selected look was recorded by an earlier search on this holdout: its model is this search's only if this
            // search's rows retrain it to exactly the per-example losses it recorded.
            note?.Invoke($"the selected look #{best.Number} was recorded before this search; retraining its configuration to check that this search's rows reproduce it");
            var trained = runner.Train(TrainerConfiguration.FromJson(best.Configuration), best.Adaptive, 1.0, null);
            model = runner.Reproduces(trained, best) ? trained.Model : null;
            if (model is null) note?.Invoke($"this search's rows do not reproduce look #{best.Number} (it was trained on other rows or settings), so no model is saved");
        }

        var selected = model is null ? null : new SelectedModel(_ml, fitted, model, statement.Best!.Number);
        var (modelPath, recordPath) = Paths(options, holdout.Name);
        // Rows made in memory cannot be rebuilt from a record, so only a search of files leaves one (and its model).
        var saved = selected is not null && options.FromFiles;
        if (saved) Save(options, fitted, holdout.Name, statement.Best!, selected!.Model, modelPath, recordPath);
        return Outcome(options, fitted, statement, outcome, modelPath, recordPath) with { ModelSaved = saved, Selected = selected };
    }

    private (string Model, string Record) Paths(TabularSearchOptions options, string holdout) =>
        (options.ModelPath ?? Path.Combine(Folder, Safe(holdout) + ".model.zip"), Path.Combine(Folder, Safe(holdout) + ".search.json"));

    private static TabularSearchOutcome Outcome(TabularSearchOptions options, Fitted fitted, Statement statement, SearchOutcome search, string modelPath, string recordPath) =>
        new(statement, search, fitted.P.Task, options.Task is null, modelPath, recordPath,
            fitted.P.TrainingRows.Count, fitted.P.ValidationRows.Count, fitted.P.TestRows.Count);

    /// <summary>
    /// Writes the selected model and the record unseal reads. Each file is written under a temporary name and moved into
    /// place, so a reader (or a second writer of the same files) never sees half of one.
    /// </summary>
    private void Save(TabularSearchOptions options, Fitted fitted, string holdout, Look best, ITransformer model, string modelPath, string recordPath)
    {
        var p = fitted.P;
        var record = new SearchRecord
        {
            DataPath = Path.GetFullPath(options.DataPath), Label = options.Label, Task = p.Task.ToString().ToLowerInvariant(), Ignore = [.. options.Ignore],
            IdColumn = options.IdColumn, Seed = options.Seed, ValidationFraction = options.ValidationFraction, TestFraction = options.TestFraction,
            ValidationPath = options.ValidationPath is null ? null : Path.GetFullPath(options.ValidationPath),
            TestPath = options.TestPath is null ? null : Path.GetFullPath(options.TestPath),
            Holdout = holdout, Look = best.Number, Configuration = best.Configuration, ModelPath = Path.GetFullPath(modelPath),
            Featurizer = p.Featurizer, Classes = p.Classes, TestRows = p.TestRows.Count,
        };
        var partial = $".{Environment.ProcessId}-{Guid.NewGuid():N}.part";
        _ml.Model.Save(model, fitted.Views.Training.Schema, modelPath + partial);
        File.Move(modelPath + partial, modelPath, overwrite: true);
        File.WriteAllText(recordPath + partial, JsonSerializer.Serialize(record, SearchRecord.JsonOptions));
        File.Move(recordPath + partial, recordPath, overwrite: true);
    }

    /// <summary>Scores the selected model on the sealed test rows, once, and returns the test score and the number of test examples.</summary>
    public (double Score, int Rows, string Fingerprint) ScoreTest(SearchRecord record)
    {
        var options = record.ToOptions();
        var prepared = Prepared.Load(options, null, record.Featurizer);
        if (prepared.TestRows.Count == 0)
        {
            throw AccountantException.BadArguments("the search kept no sealed test set (--test-fraction 0 and no --test file), so there is nothing to unseal.");
        }

        var holdout = book.Holdout(record.Holdout);
        if (Fingerprint.Compute(prepared.ValidationExamples().Select(e => e with { Label = Fingerprint.CanonicalLabel(e.Label) }).OrderBy(e => e.Id, StringComparer.Ordinal).ToList()) != holdout.Fingerprint)
        {
            throw AccountantException.BadInput($"the data in '{record.DataPath}' no longer gives holdout '{holdout.Name}' (its validation rows differ); the test set cannot be rebuilt from a changed file.");
        }

        ITransformer model;
        try
        {
            model = _ml.Model.Load(record.ModelPath, out _);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or FormatException or InvalidOperationException)
        {
            throw AccountantException.BadInput($"the selected model '{record.ModelPath}' cannot be loaded ({e.Message.TrimEnd('.')}); rerun the search to save it again.");
        }

        var fitted = new Fitted(_ml, prepared);
        var predicted = Fitted.Predict(prepared, model, fitted.Views.Build(prepared.At(prepared.TestRows)));
        var examples = prepared.TestRows.Select(r => new HoldoutExample(prepared.Data(r).Id(r.Row), prepared.Data(r).Label(r.Row))).ToList();
        var predictions = examples.Select((e, i) => new Prediction(e.Id, predicted[i])).ToList();
        var sorted = examples.OrderBy(e => e.Id, StringComparer.Ordinal).ToList();
        var stand = holdout with { Size = sorted.Count };
        var losses = Losses.Compute(stand, sorted, predictions);
        return (losses.Score, sorted.Count, Fingerprint.Compute(sorted));
    }

    /// <summary>Everything read and split, ready for training.</summary>
    internal sealed class Prepared
    {
        public required TabularSearchOptions Options { get; init; }
        public required TabularData Main { get; init; }
        public TabularData? ValidationFile { get; init; }
        public TabularData? TestFile { get; init; }
        public required TaskKind Task { get; init; }
        public required Metric Metric { get; init; }
        public LossRange? LossRange { get; init; }
        public required List<string> Classes { get; init; }
        public required Featurizer Featurizer { get; init; }
        // Rows are encoded as (file, row): 0 main, 1 validation file, 2 test file.
        public required List<(int File, int Row)> TrainingRows { get; init; }
        public required List<(int File, int Row)> ValidationRows { get; init; }
        public required List<(int File, int Row)> TestRows { get; init; }

        public TabularData Data((int File, int Row) r) => r.File switch { 1 => ValidationFile!, 2 => TestFile!, _ => Main };

        public IEnumerable<(TabularData Data, int Row)> At(IEnumerable<(int File, int Row)> rows) => rows.Select(r => (Data(r), r.Row));

        public List<HoldoutExample> ValidationExamples() =>
            ValidationRows.Select(r => new HoldoutExample(Data(r).Id(r.Row), Data(r).Label(r.Row))).ToList();

        public static Prepared Load(TabularSearchOptions o, Action<string>? note, Featurizer? fitted = null)
        {
            var main = TabularData.Load(o.Data, o.Label, o.Ignore, o.IdColumn);
            var validation = o.Validation is { } v ? TabularData.Load(v, o.Label, o.Ignore, o.IdColumn, main.Features) : null;
            var test = o.Test is { } t ? TabularData.Load(t, o.Label, o.Ignore, o.IdColumn, main.Features) : null;
            var task = o.Task ?? main.InferTask();
            if (o.Task is null)
            {
                note?.Invoke($"task inferred from the label column '{o.Label}': {Describe(task)} (give --task to choose)");
            }
            else if (task != TaskKind.Regression && main.InferTask() == TaskKind.Regression && o.Task != TaskKind.Regression)
            {
                note?.Invoke($"the label column '{o.Label}' looks continuous but is treated as classes, as --task asks");
            }

            var labels = Enumerable.Range(0, main.Count).Select(main.Label).ToList();
            List<(int, int)> training, validationRows, testRows;
            if (validation is null)
            {
                var testFraction = test is null ? o.TestFraction : 0.0;
                var split = Splits.Make(labels, o.ValidationFraction, testFraction, o.Seed, stratify: task != TaskKind.Regression);
                training = split.Training.Select(r => (0, r)).ToList();
                validationRows = split.Validation.Select(r => (0, r)).ToList();
                testRows = test is null ? split.Test.Select(r => (0, r)).ToList() : Enumerable.Range(0, test.Count).Select(r => (2, r)).ToList();
            }
            else
            {
                training = Enumerable.Range(0, main.Count).Select(r => (0, r)).ToList();
                validationRows = Enumerable.Range(0, validation.Count).Select(r => (1, r)).ToList();
                if (test is null && o.TestFraction > 0)
                {
                    var split = Splits.Make(labels, o.TestFraction, 0.0, o.Seed, stratify: task != TaskKind.Regression);
                    training = split.Training.Select(r => (0, r)).ToList();
                    testRows = split.Validation.Select(r => (0, r)).ToList();
                }
                else
                {
                    testRows = test is null ? [] : Enumerable.Range(0, test.Count).Select(r => (2, r)).ToList();
                }
            }

            TabularData Of(int file) => file switch { 1 => validation!, 2 => test!, _ => main };
            var ids = validationRows.Select(r => Of(r.Item1).Id(r.Item2)).ToList();
            if (ids.Distinct(StringComparer.Ordinal).Count() != ids.Count)
            {
                throw AccountantException.BadInput($"the validation rows repeat an id in '{o.IdColumn}'; ids must be unique (leave out --id-column to use line numbers).");
            }

            var classes = task == TaskKind.Regression ? [] : training.Concat(validationRows).Concat(testRows).Select(r => Of(r.Item1).Label(r.Item2)).Distinct().Order(StringComparer.Ordinal).ToList();
            if (task == TaskKind.Binary && classes.Count != 2)
            {
                throw AccountantException.BadInput($"binary classification needs exactly two label values, but '{o.Label}' has {classes.Count}; use --task multiclass.");
            }

            if (task == TaskKind.Regression)
            {
                foreach (var r in training.Concat(validationRows).Concat(testRows))
                {
                    if (!TabularData.TryNumber(Of(r.Item1).Label(r.Item2), out _))
                    {
                        throw AccountantException.BadInput($"regression needs numeric labels, but '{o.Label}' has '{Of(r.Item1).Label(r.Item2)}'; use --task binary or multiclass for classes.");
                    }
                }
            }

            if (training.Count < 2)
            {
                throw AccountantException.BadInput("fewer than two training rows remain after the split; give more data or lower the split fractions.");
            }

            // Regression losses are clipped to [0, range of the training labels], declared from training data alone.
            LossRange? range = null;
            if (task == TaskKind.Regression)
            {
                var values = training.Select(r => double.Parse(Of(r.Item1).Label(r.Item2), CultureInfo.InvariantCulture)).ToList();
                var width = values.Max() - values.Min();
                range = new LossRange(0, width > 0 ? width : 1.0);
            }

            var featurizer = fitted ?? FitOn(main, training);
            return new Prepared
            {
                Options = o, Main = main, ValidationFile = validation, TestFile = test, Task = task,
                Metric = task == TaskKind.Regression ? Metric.AbsoluteError : Metric.Error, LossRange = range,
                Classes = classes, Featurizer = featurizer, TrainingRows = training, ValidationRows = validationRows, TestRows = testRows,
            };
        }

        private static Featurizer FitOn(TabularData main, List<(int, int)> training) => Featurizer.Fit(main, training.Select(r => r.Item2).ToList());

        private static string Describe(TaskKind task) => task switch
        {
            TaskKind.Binary => "binary classification",
            TaskKind.Multiclass => "multiclass classification",
            _ => "regression",
        };
    }

    private sealed class Row
    {
        public float[] Features { get; set; } = [];
        public float Regression { get; set; }
        public bool Binary { get; set; }
        public string Class { get; set; } = "";
    }

    /// <summary>
    /// The ML.NET views of the rows. Multiclass labels become keys through a value-to-key map fitted on the training rows;
    /// predicted keys are read back through the key's own value annotations, so no ordering is assumed.
    /// </summary>
    internal sealed class Views
    {
        private readonly MLContext _ml;
        private readonly Prepared _prepared;
        private readonly ITransformer _label;

        public Views(MLContext ml, Prepared prepared)
        {
            _ml = ml;
            _prepared = prepared;
            var raw = Raw(prepared.At(prepared.TrainingRows));
            IEstimator<ITransformer> label = prepared.Task switch
            {
                TaskKind.Binary => ml.Transforms.CopyColumns("Label", nameof(Row.Binary)),
                TaskKind.Multiclass => ml.Transforms.Conversion.MapValueToKey("Label", nameof(Row.Class)),
                _ => ml.Transforms.CopyColumns("Label", nameof(Row.Regression)),
            };
            _label = label.Fit(raw);
            Training = _label.Transform(raw);
            Validation = Build(prepared.At(prepared.ValidationRows));
        }

        public IDataView Training { get; }

        public IDataView Validation { get; }

        public IDataView Build(IEnumerable<(TabularData Data, int Row)> rows) => _label.Transform(Raw(rows));

        private IDataView Raw(IEnumerable<(TabularData Data, int Row)> rows)
        {
            var p = _prepared;
            var definition = SchemaDefinition.Create(typeof(Row));
            definition["Features"].ColumnType = new VectorDataViewType(NumberDataViewType.Single, p.Featurizer.Width);
            var data = rows.Select(r =>
            {
                var label = r.Data.Label(r.Row);
                return new Row
                {
                    Features = p.Featurizer.Transform(r.Data, r.Row),
                    Regression = p.Task == TaskKind.Regression ? (float)double.Parse(label, CultureInfo.InvariantCulture) : 0f,
                    Binary = p.Task == TaskKind.Binary && label == p.Classes[1],
                    Class = label,
                };
            }).ToList();
            return _ml.Data.LoadFromEnumerable(data, definition);
        }
    }

    /// <summary>The prepared rows with their ML.NET views: what a model is trained on and scored with.</summary>
    internal sealed class Fitted
    {
        public Fitted(MLContext ml, Prepared prepared)
        {
            P = prepared;
            Views = new Views(ml, prepared);
            ValidationIds = prepared.ValidationRows.Select(r => prepared.Data(r).Id(r.Row)).ToList();
        }

        public Prepared P { get; }

        public Views Views { get; }

        /// <summary>The validation rows' ids, in the order of <see cref="Views.Validation"/>.</summary>
        public List<string> ValidationIds { get; }

        /// <summary>The mean loss of predictions against labels, in the metric of the search's holdout.</summary>
        public double Loss(IReadOnlyList<string> labels, IReadOnlyList<string> predicted)
        {
            double sum = 0;
            for (var i = 0; i < labels.Count; i++)
            {
                if (P.Task != TaskKind.Regression)
                {
                    sum += labels[i] == predicted[i] ? 0 : 1;
                    continue;
                }

                // As the ledger computes an absolute error: clipped to the loss range, stored as float32.
                var difference = double.Parse(predicted[i], CultureInfo.InvariantCulture) - double.Parse(labels[i], CultureInfo.InvariantCulture);
                sum += (float)P.LossRange!.Value.Clip(Math.Abs(difference));
            }

            return sum / labels.Count;
        }

        public (double Score, int Rows) Score(MLContext ml, ITransformer model, RowSource source)
        {
            var o = P.Options;
            var data = TabularData.Load(source, o.Label, o.Ignore, o.IdColumn, P.Main.Features);
            var rows = Enumerable.Range(0, data.Count).Select(r => (data, r)).ToList();
            var predicted = Predict(P, model, Views.Build(rows));
            return (Loss(rows.Select(r => data.Label(r.r)).ToList(), predicted), data.Count);
        }

        /// <summary>The model's predictions as the ledger's text, in the order of the view's rows.</summary>
        public static List<string> Predict(Prepared p, ITransformer model, IDataView view)
        {
            var scored = model.Transform(view);
            var predictions = new List<string>();
            var column = p.Task == TaskKind.Regression ? "Score" : "PredictedLabel";
            using var cursor = scored.GetRowCursor([scored.Schema[column]]);
            if (p.Task == TaskKind.Regression)
            {
                var getter = cursor.GetGetter<float>(scored.Schema[column]);
                float value = 0;
                while (cursor.MoveNext())
                {
                    getter(ref value);
                    predictions.Add(((double)value).ToString("R", CultureInfo.InvariantCulture));
                }
            }
            else if (p.Task == TaskKind.Binary)
            {
                var getter = cursor.GetGetter<bool>(scored.Schema[column]);
                var value = false;
                while (cursor.MoveNext())
                {
                    getter(ref value);
                    predictions.Add(p.Classes[value ? 1 : 0]);
                }
            }
            else
            {
                VBuffer<ReadOnlyMemory<char>> names = default;
                scored.Schema[column].GetKeyValues(ref names);
                var classes = names.DenseValues().Select(v => v.ToString()).ToArray();
                var getter = cursor.GetGetter<uint>(scored.Schema[column]);
                uint value = 0;
                while (cursor.MoveNext())
                {
                    getter(ref value);
                    // Keys are 1-based; 0 would be "missing", which a trained classifier does not predict: it counts as an error.
                    predictions.Add(value >= 1 && value <= classes.Length ? classes[value - 1] : "(no class)");
                }
            }

            return predictions;
        }
    }

    private sealed class Runner(Bookkeeper book, Holdout holdout, Fitted fitted, GuardSpec? guard, string search, int seed)
    {
        public Dictionary<int, ITransformer> Models { get; } = [];

        public Bookkeeper Book => book;

        public Fitted Fitted => fitted;

        public Holdout Holdout => holdout;

        private readonly Stopwatch _clock = Stopwatch.StartNew();
        private readonly List<ScoredConfiguration> _looks = [];
        private ScoredConfiguration? _best;
        private readonly List<ToldLook> _told = [];

        private bool Better(double a, double b) => holdout.Metric.HigherIsBetter() ? a > b : a < b;

        /// <summary>A configuration trained and its holdout predictions made, not yet recorded.</summary>
        public sealed record Trained(TrainerConfiguration Configuration, ITransformer Model, double Seconds, LookInput Input);

        /// <summary>
        /// Trains on the first <paramref name="fraction"/> of the (shuffled) training rows and predicts the holdout; records
        /// nothing. Each training has an ML.NET context of its own seeded from the search's seed, so the same configuration at
        /// the same stage trains the same model whichever process trains it, and in whatever order.
        /// </summary>
        public Trained Train(TrainerConfiguration configuration, bool adaptive, double fraction, string? stage)
        {
            var started = _clock.Elapsed;
            var p = fitted.P;
            var ml = new MLContext(seed);
            var rows = (long)Math.Max(2, Math.Round(p.TrainingRows.Count * fraction));
            var training = fraction >= 1 ? fitted.Views.Training : ml.Data.TakeRows(fitted.Views.Training, rows);
            var model = TrainerCatalog.Build(ml, p.Task, configuration).Fit(training);
            var predicted = Fitted.Predict(p, model, fitted.Views.Validation);
            var predictions = predicted.Select((value, i) => new Prediction(fitted.ValidationIds[i], value)).ToList();
            var seconds = (_clock.Elapsed - started).TotalSeconds;
            double? trainScore = null;
            if (guard?.Kind == GuardKind.Thresholdout)
            {
                var labels = p.TrainingRows.Take((int)Math.Min(rows, p.TrainingRows.Count)).Select(r => p.Data(r).Label(r.Row)).ToList();
                trainScore = fitted.Loss(labels, Fitted.Predict(p, model, training));
            }

            return new Trained(configuration, model, seconds, new LookInput
            {
                Configuration = configuration.ToJson(), Predictions = predictions, Search = search, Stage = stage,
                Seconds = Math.Round(seconds, 3), Adaptive = adaptive, Guard = guard, TrainScore = trainScore,
            });
        }

        /// <summary>
        /// Whether a model trained again gives exactly the per-example losses a recorded look stored: the same model, as far
        /// as the holdout can tell (training is reproducible from the seed, so a retrained configuration on the same rows does).
        /// </summary>
        public bool Reproduces(Trained trained, Look look)
        {
            var stored = book.Store.LossBytes(holdout, look.Number);
            if (stored is null) return false;
            var losses = Losses.Compute(holdout, book.Store.Examples(holdout), trained.Input.Predictions!);
            return losses.Bytes.AsSpan().SequenceEqual(stored);
        }

        /// <summary>Trains, scores the holdout, records one look.</summary>
        private (Look Look, double? Told) Evaluate(TrainerConfiguration configuration, bool adaptive, double fraction, string? stage)
        {
            var trained = Train(configuration, adaptive, fraction, stage);
            return Keep(trained, book.RecordMany(holdout.Name, [trained.Input])[0]);
        }

        /// <summary>Notes a recorded look of this process: its model is kept while it is this process's best.</summary>
        public (Look Look, double? Told) Keep(Trained trained, Look look)
        {
            var (configuration, model, seconds) = (trained.Configuration, trained.Model, trained.Seconds);
            var scored = new ScoredConfiguration(look, configuration, seconds);
            _looks.Add(scored);
            if (_best is null || Better(look.Score, _best.Look.Score))
            {
                _best = scored;
                Models.Clear();
                Models[look.Number] = model;
            }

            var told = look.Release is { } r ? r.Value : look.Score;
            _told.Add(new ToldLook(configuration, told));
            return (look, told);
        }

        /// <summary>Reports progress; <paramref name="best"/> overrides this process's own best (a shared search shows the whole search's).</summary>
        public void Report(IProgress<SearchProgress>? progress, int done, int total, string current, double? best = null) =>
            progress?.Report(new SearchProgress(done, total, best ?? _best?.Look.Score, _clock.Elapsed, current));

        public SearchOutcome Outcome(bool cancelled) => new(_looks, _best, cancelled);

        public SearchOutcome Plain(ISearchStrategy strategy, int looks, IProgress<SearchProgress>? progress, CancellationToken cancel)
        {
            for (var i = 0; i < looks; i++)
            {
                var (configuration, adaptive) = strategy.Next(i, _told);
                Report(progress, i, looks, configuration.Trainer);
                if (cancel.IsCancellationRequested) return Outcome(true);
                Evaluate(configuration, adaptive, 1.0, null);
            }

            Report(progress, looks, looks, "done");
            return Outcome(false);
        }

        /// <summary>
        /// Successive halving (Jamieson &amp; Talwalkar 2016, AISTATS; the inner loop of Hyperband, Li et al. 2017, JMLR 18:185) with
        /// η = 3 over the share of training rows: rung i trains ⌊K/3^i⌋ configurations on 3^(i − R) of the rows, R = ⌊log₃ K⌋,
        /// and promotes the best third by the values told. Every stage is a look; rungs after the first are adaptive.
        /// </summary>
        public SearchOutcome Halving(IReadOnlyList<TrainerSpace> space, int looks, int seed, IProgress<SearchProgress>? progress, CancellationToken cancel)
        {
            var rungs = Search.Halving.Rungs(looks);
            var total = Search.Halving.Sizes(looks).Sum();
            var current = BinaryTrainers.RandomConfigurations(space, looks, seed);
            var done = 0;
            for (var rung = 0; rung <= rungs && current.Count > 0; rung++)
            {
                var fraction = Search.Halving.Fraction(rung, rungs);
                var stage = Search.Halving.Stage(fraction);
                var results = new List<(TrainerConfiguration Configuration, double? Told)>();
                foreach (var configuration in current)
                {
                    Report(progress, done, total, $"{configuration.Trainer} at {stage}");
                    if (cancel.IsCancellationRequested) return Outcome(true);
                    var (_, told) = Evaluate(configuration, adaptive: rung > 0, fraction, stage);
                    results.Add((configuration, told));
                    done++;
                }

                current = rung == rungs ? [] : Search.Halving.Keep(results, holdout.Metric.HigherIsBetter());
            }

            Report(progress, total, total, "done");
            return Outcome(false);
        }
    }
}

/// <summary>The record a search leaves beside the ledger so that its selected model and sealed test set can be found again.</summary>
public sealed class SearchRecord
{
    public static readonly JsonSerializerOptions JsonOptions = new() { WriteIndented = true };

    public int Version { get; set; } = 1;
    public string DataPath { get; set; } = "";
    public string Label { get; set; } = "";
    public string Task { get; set; } = "";
    public List<string> Ignore { get; set; } = [];
    public string? IdColumn { get; set; }
    public int Seed { get; set; }
    public double ValidationFraction { get; set; }
    public double TestFraction { get; set; }
    public string? ValidationPath { get; set; }
    public string? TestPath { get; set; }
    public string Holdout { get; set; } = "";
    public int Look { get; set; }
    public string Configuration { get; set; } = "";
    public string ModelPath { get; set; } = "";
    public Featurizer Featurizer { get; set; } = new();
    public List<string> Classes { get; set; } = [];
    public int TestRows { get; set; }

    public TabularSearchOptions ToOptions() => new()
    {
        DataPath = DataPath, Label = Label, Task = Enum.Parse<TaskKind>(Task, ignoreCase: true), Ignore = Ignore, IdColumn = IdColumn, Seed = Seed,
        ValidationFraction = ValidationFraction, TestFraction = TestFraction, ValidationPath = ValidationPath, TestPath = TestPath, HoldoutName = Holdout,
    };

    public static SearchRecord Read(string path)
    {
        try
        {
            return JsonSerializer.Deserialize<SearchRecord>(File.ReadAllText(path), JsonOptions)
                   ?? throw AccountantException.BadInput($"the search record '{path}' is empty; rerun the search.");
        }
        catch (FileNotFoundException)
        {
            throw AccountantException.BadArguments($"no search record at '{path}': unseal needs a holdout made by 'accountant search' with this ledger.");
        }
        catch (JsonException)
        {
            throw AccountantException.BadInput($"the search record '{path}' is damaged; rerun the search.");
        }
    }
}
