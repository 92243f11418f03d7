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

    /// <summary>
    /// The most training rows kept; more keep a seeded sample of this many, stratified by class, and the rest are left out
    /// (said on stderr and in the search record). With the two below, bounds the memory a search of any file takes.
    /// </summary>
    public long MaxTrainingRows { get; init; } = 1_000_000;

    /// <summary>The most validation rows (the holdout) kept, as <see cref="MaxTrainingRows"/> for training rows.</summary>
    public long MaxValidationRows { get; init; } = 200_000;

    /// <summary>The most sealed test rows kept, as <see cref="MaxTrainingRows"/> for training rows.</summary>
    public long MaxTestRows { get; init; } = 200_000;

    /// <summary>The caps of training, validation and test, in that order, and their options.</summary>
    internal long[] Caps => [MaxTrainingRows, MaxValidationRows, MaxTestRows];

    internal static readonly string[] CapOptions = ["--max-training-rows", "--max-validation-rows", "--max-test-rows"];

    /// <summary>Bits of the hash a categorical column with more than <see cref="Featurizer.MaxLevels"/> training values is hashed to.</summary>
    public int HashBits { get; init; } = Featurizer.DefaultHashBits;

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
    /// <summary>Rows the caps (<see cref="TabularSearchOptions.MaxTrainingRows"/> and the others) left out of the search.</summary>
    public long LeftOut { get; init; }

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

    /// <summary>Where the last <see cref="Run"/> of this object spent its time.</summary>
    public SearchTimings Timings { get; private set; } = new();

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

        Timings = new SearchTimings();
        CheckFinish(options);
        var prepared = Timings.Read(() => Prepared.Load(options, note, progress));
        var task = prepared.Task;
        var space = options.SpacePath is { } spacePath ? SpaceFile.Read(spacePath, task) : TrainerCatalog.DefaultSpace(task);
        var name = options.HoldoutName ?? DefaultHoldoutName(options.DataPath);
        if (options.Share is not null) return RunShared(options, prepared, space, name, progress, note, cancel);
        var holdout = Timings.Account(() => book.EnsureHoldout(name, prepared.ValidationExamples(), prepared.Metric, prepared.LossRange));
        var fitted = Timings.Featurize(() => new Fitted(_ml, prepared));
        var runner = new Runner(book, holdout, fitted, options.Guard, options.SearchLabel ?? $"search-{options.Strategy}-seed{options.Seed}", options.Seed, Timings);
        var outcome = options.Strategy switch
        {
            "halving" => runner.Halving(space, options.Looks, options.Seed, progress, cancel),
            "grid" => runner.Plain(new GridStrategy(space, options.Looks), Math.Min(options.Looks, new GridStrategy(space, options.Looks).Count), progress, cancel),
            "refine" => runner.Plain(new RefineStrategy(space, options.Looks, options.Seed, holdout.Metric.HigherIsBetter()), options.Looks, progress, cancel),
            "random" => runner.Plain(new RandomStrategy(space, options.Looks, options.Seed), options.Looks, progress, cancel),
            _ => throw AccountantException.BadArguments($"unknown strategy '{options.Strategy}'; use random, grid, refine or halving."),
        };

        var statement = Timings.Account(() => book.Statement(holdout.Name, options.Statement));
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
        Timings.Stop();
        return Outcome(options, fitted, statement, outcome, modelPath, recordPath) with { ModelSaved = saved, Selected = selected };
    }

    private (string Model, string Record) Paths(TabularSearchOptions options, string holdout) =>
        (options.ModelPath ?? Path.Combine(Folder, Safe(holdout) + ".model.zip"), Path.Combine(Folder, Safe(holdout) + ".search.json"));

    private static TabularSearchOutcome Outcome(TabularSearchOptions options, Fitted fitted, Statement statement, SearchOutcome search, string modelPath, string recordPath) =>
        new(statement, search, fitted.P.Task, options.Task is null, modelPath, recordPath,
            fitted.P.Training.Count, fitted.P.Validation.Count, fitted.P.Test.Count) { LeftOut = fitted.P.LeftOut.Sum() };

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
            Featurizer = p.Featurizer, Classes = p.Classes,
            MaxTrainingRows = options.MaxTrainingRows, MaxValidationRows = options.MaxValidationRows, MaxTestRows = options.MaxTestRows,
            TrainingRows = p.Training.Count, ValidationRows = p.Validation.Count, TestRows = p.Test.Count, LeftOut = [.. p.LeftOut],
            TestFingerprint = p.TestFingerprint,
        };
        var partial = $".{Environment.ProcessId}-{Guid.NewGuid():N}.part";
        Timings.Save(() =>
        {
            _ml.Model.Save(model, fitted.Views.Training.Schema, modelPath + partial);
            File.Move(modelPath + partial, modelPath, overwrite: true);
            File.WriteAllText(recordPath + partial, JsonSerializer.Serialize(record, SearchRecord.JsonOptions));
            File.Move(recordPath + partial, recordPath, overwrite: true);
        });
    }

    /// <summary>
    /// Scores the selected model on the sealed test rows, once, and returns the test score, the number of test examples and
    /// their fingerprint. The rows are rebuilt from the record (the same file, seed, fractions and cap give the same split);
    /// the validation rows must still give the holdout and the test rows the fingerprint the search recorded.
    /// </summary>
    public (double Score, int Rows, string Fingerprint) ScoreTest(SearchRecord record)
    {
        var options = record.ToOptions();
        var prepared = Prepared.Load(options, null, null, record.Featurizer, Purpose.Unseal);
        if (prepared.Test.Count == 0)
        {
            throw AccountantException.BadArguments("the search kept no sealed test set (--test-fraction 0 and no --test file), so there is nothing to unseal.");
        }

        var holdout = book.Holdout(record.Holdout);
        if (Fingerprint.Compute(prepared.ValidationExamples().OrderBy(e => e.Id, StringComparer.Ordinal).ToList()) != holdout.Fingerprint)
        {
            throw AccountantException.BadInput($"the data in '{record.DataPath}' no longer gives holdout '{holdout.Name}' (its validation rows differ); the test set cannot be rebuilt from a changed file.");
        }

        if (prepared.TestFingerprint != record.TestFingerprint)
        {
            throw AccountantException.BadInput($"the data in '{record.DataPath}' no longer gives the sealed test rows the search recorded (their fingerprint differs); the test set cannot be rebuilt from a changed file.");
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

        var predicted = Fitted.Predict(prepared, model, new Views(_ml, prepared, fit: false).Build(prepared.Test, prepared.Binding));
        return (prepared.Mean(holdout.LossRange, prepared.Test, predicted), prepared.Test.Count, prepared.TestFingerprint!);
    }

    private sealed class Runner(Bookkeeper book, Holdout holdout, Fitted fitted, GuardSpec? guard, string search, int seed, SearchTimings timings)
    {
        public SearchTimings Timings => timings;

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
        public Trained Train(TrainerConfiguration configuration, bool adaptive, double fraction, string? stage) =>
            timings.Train(() => TrainNow(configuration, adaptive, fraction, stage));

        private Trained TrainNow(TrainerConfiguration configuration, bool adaptive, double fraction, string? stage)
        {
            var started = _clock.Elapsed;
            var p = fitted.P;
            var ml = new MLContext(seed);
            var rows = (int)Math.Max(2, Math.Round(p.Training.Count * fraction));
            var training = fraction >= 1 ? fitted.Views.Training : ml.Data.TakeRows(fitted.Views.Training, rows);
            var model = TrainerCatalog.Build(ml, p.Task, configuration).Fit(training);
            var losses = fitted.Losses(Fitted.Predict(p, model, fitted.Views.Validation));
            var seconds = (_clock.Elapsed - started).TotalSeconds;
            double? trainScore = null;
            if (guard?.Kind == GuardKind.Thresholdout)
            {
                trainScore = p.Mean(holdout.LossRange, p.Training, Fitted.Predict(p, model, training), p.TrainingOrder);
            }

            return new Trained(configuration, model, seconds, new LookInput
            {
                Configuration = configuration.ToJson(), Losses = losses, Search = search, Stage = stage,
                Seconds = Math.Round(seconds, 3), Adaptive = adaptive, Guard = guard, TrainScore = trainScore,
            });
        }

        /// <summary>
        /// Whether a model trained again gives exactly the per-example losses a recorded look stored: the same model, as far
        /// as the holdout can tell (training is reproducible from the seed, so a retrained configuration on the same rows does).
        /// </summary>
        public bool Reproduces(Trained trained, Look look) =>
            book.Store.LossBytes(holdout, look.Number) is { } stored && trained.Input.Losses.AsSpan().SequenceEqual(stored);

        /// <summary>Trains, scores the holdout, records one look.</summary>
        private (Look Look, double? Told) Evaluate(TrainerConfiguration configuration, bool adaptive, double fraction, string? stage)
        {
            var trained = Train(configuration, adaptive, fraction, stage);
            return Keep(trained, timings.Account(() => book.RecordMany(holdout.Name, [trained.Input])[0]));
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

    /// <summary>Version 2 (streamed splits, the row cap, feature hashing, the test rows' fingerprint); version 1 records are refused.</summary>
    public const int CurrentVersion = 2;

    public int Version { get; set; } = CurrentVersion;
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
    public long MaxTrainingRows { get; set; }
    public long MaxValidationRows { get; set; }
    public long MaxTestRows { get; set; }
    public int TrainingRows { get; set; }
    public int ValidationRows { get; set; }
    public int TestRows { get; set; }

    /// <summary>Rows of each part (training, validation, test) the cap left out of the search.</summary>
    public List<long> LeftOut { get; set; } = [];

    /// <summary>The fingerprint of the sealed test rows' ids and labels when the search split them; unseal must rebuild the same.</summary>
    public string? TestFingerprint { get; set; }

    public TabularSearchOptions ToOptions() => new()
    {
        DataPath = DataPath, Label = Label, Task = Enum.Parse<TaskKind>(Task, ignoreCase: true), Ignore = Ignore, IdColumn = IdColumn, Seed = Seed,
        ValidationFraction = ValidationFraction, TestFraction = TestFraction, ValidationPath = ValidationPath, TestPath = TestPath, HoldoutName = Holdout,
        MaxTrainingRows = MaxTrainingRows, MaxValidationRows = MaxValidationRows, MaxTestRows = MaxTestRows, HashBits = Featurizer.HashBits,
    };

    public static SearchRecord Read(string path)
    {
        try
        {
            var record = JsonSerializer.Deserialize<SearchRecord>(File.ReadAllText(path), JsonOptions)
                         ?? throw AccountantException.BadInput($"the search record '{path}' is empty; rerun the search.");
            if (record.Version != CurrentVersion)
            {
                throw AccountantException.BadInput($"the search record '{path}' is of version {record.Version}, written by another version of the accountant whose split this one does not rebuild; unseal it with that version, or rerun the search.");
            }

            return record;
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
