using System.CommandLine;
using Accountant.Cli.Output;
using Accountant.Search;
using Accountant.Search.Data;
using Accountant.Search.Plots;
using Accountant.Search.Trainers;

namespace Accountant.Cli.Commands;

internal sealed class SearchCommand : Command
{
    public SearchCommand(CliEnvironment env)
        : base("search", "Run a hyperparameter search on your own CSV with ML.NET, counting every look and sealing a test set.\nExample: accountant search data.csv --label class --looks 50 --strategy halving --plot search.png")
    {
        var data = new Argument<string?>("DATA") { Description = "CSV with a header: the training data (and, unless --validation is given, the validation and test rows).", Arity = ArgumentArity.ZeroOrOne };
        var label = new Option<string?>("--label") { Description = "The column to predict." };
        var task = new Option<string?>("--task") { Description = "binary, multiclass or regression (inferred from the label column when left out)." };
        task.AcceptOnlyFromAmong("binary", "multiclass", "regression");
        var ignore = new Option<string[]>("--ignore") { Description = "Columns to leave out (repeat, or separate with commas).", AllowMultipleArgumentsPerToken = true };
        var idColumn = new Option<string?>("--id-column") { Description = "A column of unique row ids (else the file's line numbers)." };
        var seed = new Option<int>("--seed") { Description = "Seed for the splits and the search.", DefaultValueFactory = _ => 1 };
        var validationFraction = new Option<double>("--validation-fraction") { Description = "Share of rows for the validation set (the holdout).", DefaultValueFactory = _ => 0.2 };
        var testFraction = new Option<double>("--test-fraction") { Description = "Share of rows sealed as the test set.", DefaultValueFactory = _ => 0.2 };
        var validation = new Option<string?>("--validation") { Description = "A separate validation file (same columns)." };
        var test = new Option<string?>("--test") { Description = "A separate test file to seal (same columns)." };
        var defaults = new TabularSearchOptions { DataPath = "", Label = "" };
        Option<long> Cap(string name, string part, long value) => new(name) { Description = $"The most {part} rows kept: more keep a seeded sample of this many, stratified by class, and the rest are left out (bounds memory on large files).", DefaultValueFactory = _ => value };
        var maxTraining = Cap("--max-training-rows", "training", defaults.MaxTrainingRows);
        var maxValidation = Cap("--max-validation-rows", "validation (holdout)", defaults.MaxValidationRows);
        var maxTest = Cap("--max-test-rows", "sealed test", defaults.MaxTestRows);
        var hashBits = new Option<int>("--hash-bits") { Description = "A categorical column with more than 50 training values is hashed into 2^BITS slots.", DefaultValueFactory = _ => Featurizer.DefaultHashBits };
        var space = new Option<string?>("--space") { Description = "A search space JSON file (see --print-space)." };
        var printSpace = new Option<bool>("--print-space") { Description = "Print the default search space for --task (binary by default) and stop." };
        var strategy = new Option<string>("--strategy") { Description = "random, grid (non-adaptive), refine or halving (adaptive).", DefaultValueFactory = _ => "random" };
        strategy.AcceptOnlyFromAmong("random", "grid", "refine", "halving");
        var looks = new Option<int>("--looks") { Description = "Configurations to try (halving: the first rung).", DefaultValueFactory = _ => 20 };
        var guard = new Option<string?>("--guard") { Description = "Release scores to adaptive strategies through a guard: exact, rounded:D, ladder:STEP, thresholdout:T,SIGMA,BUDGET." };
        var name = new Option<string?>("--name") { Description = "The holdout's name (default: the data file's name + '-validation')." };
        var modelOut = new Option<string?>("--model-out") { Description = "Where to save the selected model (ML.NET zip)." };
        var plot = new Option<string?>("--plot") { Description = "Also write the search's plot (.png or .svg)." };
        var quiet = new Option<bool>("--quiet") { Description = "No progress bar." };
        var share = new Option<string?>("--share") { Description = "Work through one search plan, stored in the ledger, with every other worker given the same NAME and settings (random, grid or halving); the ledger must exist (accountant init)." };
        var finish = new Option<bool>("--finish") { Description = "With --share, when every configuration of the shared search is done: only save the selected model and its record (when no worker did), then print the statement; give the workers' settings." };
        var lease = new Option<string>("--lease") { Description = "With --share: how long a claimed configuration stays this worker's unless renewed (renewed while it trains), e.g. 90s, 5m, 1500ms.", DefaultValueFactory = _ => "2m" };
        var confidence = Common.Confidence();
        var tolerance = Common.Tolerance(0.02);
        var twoSided = Common.TwoSided();
        var format = Common.Format("table", "json", "markdown");
        Arguments.Add(data);
        foreach (var option in new Option[] { label, task, ignore, idColumn, seed, validationFraction, testFraction, validation, test, maxTraining, maxValidation, maxTest, hashBits, space, printSpace, strategy, looks, guard, name, modelOut, plot, quiet, share, finish, lease, confidence, tolerance, twoSided, format })
        {
            Options.Add(option);
        }

        SetAction(r => Common.Guard(env, () =>
        {
            TaskKind? kind = r.GetValue(task) is { } t ? Enum.Parse<TaskKind>(t, ignoreCase: true) : null;
            if (r.GetValue(printSpace))
            {
                env.Output.Write(SpaceFile.Write(TrainerCatalog.DefaultSpace(kind ?? TaskKind.Binary)));
                return ExitCodes.Success;
            }

            var dataPath = r.GetValue(data) ?? throw AccountantException.BadArguments("give the data file: accountant search DATA.csv --label COLUMN.");
            var labelName = r.GetValue(label) ?? throw AccountantException.BadArguments("give the column to predict with --label COLUMN.");
            var options = new TabularSearchOptions
            {
                DataPath = dataPath, Label = labelName, Task = kind,
                Ignore = (r.GetValue(ignore) ?? []).SelectMany(v => v.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries)).ToList(),
                IdColumn = r.GetValue(idColumn), Seed = r.GetValue(seed), ValidationFraction = r.GetValue(validationFraction), TestFraction = r.GetValue(testFraction),
                ValidationPath = r.GetValue(validation), TestPath = r.GetValue(test), SpacePath = r.GetValue(space), Strategy = r.GetValue(strategy)!,
                Looks = r.GetValue(looks), Guard = r.GetValue(guard) is { } g ? Guards.GuardSpec.Parse(g) : null, HoldoutName = r.GetValue(name),
                ModelPath = r.GetValue(modelOut), Statement = Common.StatementOptions(r, confidence, tolerance, twoSided),
                Share = r.GetValue(share), Lease = Duration(r.GetValue(lease)!, "--lease"), Finish = r.GetValue(finish),
                MaxTrainingRows = r.GetValue(maxTraining), MaxValidationRows = r.GetValue(maxValidation), MaxTestRows = r.GetValue(maxTest), HashBits = r.GetValue(hashBits),
            };
            var plotPath = r.GetValue(plot);
            if (plotPath is not null) StatementPlot.CheckPath(plotPath);
            var ledger = Common.LedgerPath(r, env);
            // Shared workers open a ledger made beforehand, so that workers starting together do not race to create it.
            using var book = options.Share is null ? Bookkeeper.OpenOrCreate(ledger, env.Clock) : Bookkeeper.Open(ledger, env.Clock);
            var progress = r.GetValue(quiet) ? null : new ProgressBar(env.Error, env.ErrorIsTerminal, "score");
            TabularSearchOutcome outcome;
            using (CtrlC.Observe())
            {
                outcome = new TabularSearch(book, ledger).Run(options, progress, message => env.Error.WriteLine("accountant: " + message), env.Cancel);
            }

            if (outcome.Search.Cancelled)
            {
                env.Error.WriteLine($"accountant: interrupted after {outcome.Search.Looks.Count} look(s); every finished look was kept and the statement below covers them.");
            }

            if (plotPath is not null)
            {
                StatementPlot.Write(book, outcome.Statement.Holdout.Name, plotPath, outcome.Statement.Options);
            }

            env.Output.Write(StatementWriter.Render(outcome.Statement, r.GetValue(format)!));
            if (r.GetValue(format) == "table")
            {
                env.Output.WriteLine();
                var model = outcome.ModelSaved ? $"selected model {outcome.ModelPath}"
                    : outcome.SavedBy is { } by ? $"the selected model was saved by worker {by} (its record at {outcome.SavedAt})" : "no selected model saved by this search";
                var leftOut = outcome.LeftOut > 0 ? $" ({Text.Count(outcome.LeftOut)} more left out by the --max-*-rows caps)" : "";
                env.Output.WriteLine($"Data         {Text.Count(outcome.TrainingRows)} training, {Text.Count(outcome.ValidationRows)} validation and {Text.Count(outcome.TestRows)} sealed test rows{leftOut}; {model}");
                env.Output.WriteLine($"Next         'accountant unseal {outcome.Statement.Holdout.Name}' scores the selected model on the sealed test set, once.");
            }

            return outcome.Search.Cancelled ? ExitCodes.Interrupted : ExitCodes.Success;
        }));
    }

    /// <summary>A duration written as a number and a unit: 1500ms, 90s, 5m, 1h (seconds when the unit is left out).</summary>
    internal static TimeSpan Duration(string text, string option)
    {
        var t = text.Trim();
        var (number, scale) = t.EndsWith("ms", StringComparison.Ordinal) ? (t[..^2], 0.001)
            : t.EndsWith('s') ? (t[..^1], 1.0)
            : t.EndsWith('m') ? (t[..^1], 60.0)
            : t.EndsWith('h') ? (t[..^1], 3600.0)
            : (t, 1.0);
        if (!double.TryParse(number, System.Globalization.NumberStyles.Float, System.Globalization.CultureInfo.InvariantCulture, out var value) || !double.IsFinite(value) || value <= 0 || value * scale > 86400)
        {
            throw AccountantException.BadArguments($"{option} takes a positive duration of at most a day, such as 90s, 5m or 1500ms, not '{text}'.");
        }

        return TimeSpan.FromSeconds(value * scale);
    }
}
