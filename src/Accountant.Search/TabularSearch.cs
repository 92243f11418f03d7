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

    /// <summary>In a shared search, the worker whose look was selected (it saves the selected model); null otherwise.</summary>
    public string? SelectedBy { get; init; }
}

/// <summary>
/// A hyperparameter search on the user's own CSV: split (or separate files), featurize on the training rows only, register
/// the validation rows as the holdout, try configurations by a strategy, record every look (every stage of halving too),
/// and keep the selected model with a record of how to rebuild its sealed test set.
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
        var prepared = Prepared.Load(options, note);
        var task = prepared.Task;
        var space = options.SpacePath is { } spacePath ? SpaceFile.Read(spacePath, task) : TrainerCatalog.DefaultSpace(task);
        var name = options.HoldoutName ?? DefaultHoldoutName(options.DataPath);
        if (options.Share is not null) return RunShared(options, prepared, space, name, progress, note, cancel);
        var holdout = book.EnsureHoldout(name, prepared.ValidationExamples(), prepared.Metric, prepared.LossRange);
        var views = new Views(_ml, prepared);
        var runner = new Runner(_ml, book, holdout, prepared, views, options.Guard, $"search-{options.Strategy}-seed{options.Seed}");
        var outcome = options.Strategy switch
        {
            "halving" => runner.Halving(space, options.Looks, options.Seed, progress, cancel),
            "grid" => runner.Plain(new GridStrategy(space, options.Looks), Math.Min(options.Looks, new GridStrategy(space, options.Looks).Count), progress, cancel),
            "refine" => runner.Plain(new RefineStrategy(space, options.Looks, options.Seed, holdout.Metric.HigherIsBetter()), options.Looks, progress, cancel),
            "random" => runner.Plain(new RandomStrategy(space, options.Looks, options.Seed), options.Looks, progress, cancel),
            _ => throw AccountantException.BadArguments($"unknown strategy '{options.Strategy}'; use random, grid, refine or halving."),
        };

        return Finish(options, prepared, views, runner, holdout, outcome);
    }

    /// <summary>The statement, and the selected model with its record when this process trained the selected look.</summary>
    private TabularSearchOutcome Finish(TabularSearchOptions options, Prepared prepared, Views views, Runner runner, Holdout holdout, SearchOutcome outcome)
    {
        var task = prepared.Task;
        var statement = book.Statement(holdout.Name, options.Statement);
        var modelPath = options.ModelPath ?? Path.Combine(Folder, Safe(holdout.Name) + ".model.zip");
        var recordPath = Path.Combine(Folder, Safe(holdout.Name) + ".search.json");
        var saved = false;
        if (statement.Best is { } best && runner.Models.TryGetValue(best.Number, out var model))
        {
            saved = true;
            _ml.Model.Save(model, views.Training.Schema, modelPath);
            var record = new SearchRecord
            {
                DataPath = Path.GetFullPath(options.DataPath), Label = options.Label, Task = task.ToString().ToLowerInvariant(), Ignore = [.. options.Ignore],
                IdColumn = options.IdColumn, Seed = options.Seed, ValidationFraction = options.ValidationFraction, TestFraction = options.TestFraction,
                ValidationPath = options.ValidationPath is null ? null : Path.GetFullPath(options.ValidationPath),
                TestPath = options.TestPath is null ? null : Path.GetFullPath(options.TestPath),
                Holdout = holdout.Name, Look = best.Number, Configuration = best.Configuration, ModelPath = Path.GetFullPath(modelPath),
                Featurizer = prepared.Featurizer, Classes = prepared.Classes, TestRows = prepared.TestRows.Count,
            };
            File.WriteAllText(recordPath, JsonSerializer.Serialize(record, SearchRecord.JsonOptions));
        }

        return new TabularSearchOutcome(statement, outcome, task, options.Task is null, modelPath, recordPath,
            prepared.TrainingRows.Count, prepared.ValidationRows.Count, prepared.TestRows.Count) { ModelSaved = saved };
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

        var view = new Views(_ml, prepared).Build(prepared.TestRows);
        var predictions = Runner.Predict(_ml, prepared, model, view, prepared.TestRows);
        var examples = prepared.TestRows.Select(r => new HoldoutExample(prepared.Data(r).Id(prepared.Row(r)), prepared.Data(r).Label(prepared.Row(r)))).ToList();
        var sorted = examples.OrderBy(e => e.Id, StringComparer.Ordinal).ToList();
        var stand = holdout with { Size = sorted.Count };
        var losses = Losses.Compute(stand, sorted, predictions);
        return (losses.Score, sorted.Count, Fingerprint.Compute(sorted));
    }

    /// <summary>Everything read and split, ready for training.</summary>
    private sealed class Prepared
    {
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

        public int Row((int File, int Row) r) => r.Row;

        public List<HoldoutExample> ValidationExamples() =>
            ValidationRows.Select(r => new HoldoutExample(Data(r).Id(r.Row), Data(r).Label(r.Row))).ToList();

        public static Prepared Load(TabularSearchOptions o, Action<string>? note, Featurizer? fitted = null)
        {
            var main = TabularData.Load(o.DataPath, o.Label, o.Ignore, o.IdColumn);
            var validation = o.ValidationPath is null ? null : TabularData.Load(o.ValidationPath, o.Label, o.Ignore, o.IdColumn, main.Features);
            var test = o.TestPath is null ? null : TabularData.Load(o.TestPath, o.Label, o.Ignore, o.IdColumn, main.Features);
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
                Main = main, ValidationFile = validation, TestFile = test, Task = task,
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
    private sealed class Views
    {
        private readonly MLContext _ml;
        private readonly Prepared _prepared;
        private readonly ITransformer _label;

        public Views(MLContext ml, Prepared prepared)
        {
            _ml = ml;
            _prepared = prepared;
            var raw = Raw(prepared.TrainingRows);
            IEstimator<ITransformer> label = prepared.Task switch
            {
                TaskKind.Binary => ml.Transforms.CopyColumns("Label", nameof(Row.Binary)),
                TaskKind.Multiclass => ml.Transforms.Conversion.MapValueToKey("Label", nameof(Row.Class)),
                _ => ml.Transforms.CopyColumns("Label", nameof(Row.Regression)),
            };
            _label = label.Fit(raw);
            Training = _label.Transform(raw);
            Validation = Build(prepared.ValidationRows);
        }

        public IDataView Training { get; }

        public IDataView Validation { get; }

        public IDataView Build(IReadOnlyList<(int File, int Row)> rows) => _label.Transform(Raw(rows));

        private IDataView Raw(IReadOnlyList<(int File, int Row)> rows)
        {
            var p = _prepared;
            var definition = SchemaDefinition.Create(typeof(Row));
            definition["Features"].ColumnType = new VectorDataViewType(NumberDataViewType.Single, p.Featurizer.Width);
            var data = rows.Select(r =>
            {
                var label = p.Data(r).Label(r.Row);
                return new Row
                {
                    Features = p.Featurizer.Transform(p.Data(r), r.Row),
                    Regression = p.Task == TaskKind.Regression ? (float)double.Parse(label, CultureInfo.InvariantCulture) : 0f,
                    Binary = p.Task == TaskKind.Binary && label == p.Classes[1],
                    Class = label,
                };
            }).ToList();
            return _ml.Data.LoadFromEnumerable(data, definition);
        }
    }

    private sealed class Runner(MLContext ml, Bookkeeper book, Holdout holdout, Prepared prepared, Views views, GuardSpec? guard, string search)
    {
        public Dictionary<int, ITransformer> Models { get; } = [];

        public Bookkeeper Book => book;
        private readonly Stopwatch _clock = Stopwatch.StartNew();
        private readonly List<ScoredConfiguration> _looks = [];
        private ScoredConfiguration? _best;
        private readonly List<ToldLook> _told = [];

        private bool Better(double a, double b) => holdout.Metric.HigherIsBetter() ? a > b : a < b;

        /// <summary>A configuration trained and its holdout predictions made, not yet recorded.</summary>
        public sealed record Trained(TrainerConfiguration Configuration, ITransformer Model, double Seconds, LookInput Input);

        /// <summary>Trains on the first <paramref name="fraction"/> of the (shuffled) training rows and predicts the holdout; records nothing.</summary>
        public Trained Train(TrainerConfiguration configuration, bool adaptive, double fraction, string? stage)
        {
            var started = _clock.Elapsed;
            var rows = (long)Math.Max(2, Math.Round(prepared.TrainingRows.Count * fraction));
            var training = fraction >= 1 ? views.Training : ml.Data.TakeRows(views.Training, rows);
            var model = TrainerCatalog.Build(ml, prepared.Task, configuration).Fit(training);
            var predictions = Predict(ml, prepared, model, views.Validation, prepared.ValidationRows);
            var seconds = (_clock.Elapsed - started).TotalSeconds;
            double? trainScore = guard?.Kind == GuardKind.Thresholdout ? TrainingScore(model, training) : null;
            return new Trained(configuration, model, seconds, new LookInput
            {
                Configuration = configuration.ToJson(), Predictions = predictions, Search = search, Stage = stage,
                Seconds = Math.Round(seconds, 3), Adaptive = adaptive, Guard = guard, TrainScore = trainScore,
            });
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

        private double TrainingScore(ITransformer model, IDataView training)
        {
            var rows = prepared.TrainingRows.Take((int)Math.Min(int.MaxValue, training.GetRowCount() ?? prepared.TrainingRows.Count)).ToList();
            var examples = rows.Select(r => new HoldoutExample(prepared.Data(r).Id(r.Row), prepared.Data(r).Label(r.Row))).OrderBy(e => e.Id, StringComparer.Ordinal).ToList();
            return Losses.Compute(holdout with { Size = examples.Count }, examples, Predict(ml, prepared, model, training, rows)).Score;
        }

        public void Report(IProgress<SearchProgress>? progress, int done, int total, string current) =>
            progress?.Report(new SearchProgress(done, total, _best?.Look.Score, _clock.Elapsed, current));

        public SearchOutcome Outcome(bool cancelled) => new(_looks, _best, null, cancelled);

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

        public static List<Prediction> Predict(MLContext ml, Prepared p, ITransformer model, IDataView view, IReadOnlyList<(int File, int Row)> rows)
        {
            var scored = model.Transform(view);
            var predictions = new List<Prediction>(rows.Count);
            var column = p.Task == TaskKind.Regression ? "Score" : "PredictedLabel";
            using var cursor = scored.GetRowCursor([scored.Schema[column]]);
            var i = 0;
            if (p.Task == TaskKind.Regression)
            {
                var getter = cursor.GetGetter<float>(scored.Schema[column]);
                float value = 0;
                while (cursor.MoveNext())
                {
                    getter(ref value);
                    predictions.Add(new Prediction(p.Data(rows[i]).Id(rows[i].Row), ((double)value).ToString("R", CultureInfo.InvariantCulture)));
                    i++;
                }
            }
            else if (p.Task == TaskKind.Binary)
            {
                var getter = cursor.GetGetter<bool>(scored.Schema[column]);
                var value = false;
                while (cursor.MoveNext())
                {
                    getter(ref value);
                    predictions.Add(new Prediction(p.Data(rows[i]).Id(rows[i].Row), p.Classes[value ? 1 : 0]));
                    i++;
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
                    predictions.Add(new Prediction(p.Data(rows[i]).Id(rows[i].Row), value >= 1 && value <= classes.Length ? classes[value - 1] : "(no class)"));
                    i++;
                }
            }

            return predictions;
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
