using System.CommandLine;
using Accountant.Cli.Output;
using Accountant.Search.Demo;
using Accountant.Search.Trainers;
using Accountant.Statements;

namespace Accountant.Cli.Commands;

internal sealed class DemoCommand : Command
{
    public DemoCommand(CliEnvironment env)
        : base("demo", "Run a real ML.NET random search on an invented bakery scenario, account for every look, and compare the statement with the selected model's true error.\nExample: accountant demo --looks 60 --ledger demo.db")
    {
        var looks = new Option<int>("--looks") { Description = "How many configurations to try.", DefaultValueFactory = _ => 60 };
        var seed = new Option<int>("--seed") { Description = "Seed for the data and the search.", DefaultValueFactory = _ => 2026 };
        var trainingRows = new Option<int>("--training-rows") { Description = "Training days.", DefaultValueFactory = _ => 2000 };
        var validationRows = new Option<int>("--validation-rows") { Description = "Validation days (the holdout).", DefaultValueFactory = _ => 1000 };
        var freshRows = new Option<int>("--fresh-rows") { Description = "Fresh days drawn to measure the selected model's true error.", DefaultValueFactory = _ => 100_000 };
        var confidence = Common.Confidence();
        // 1,000 validation days cannot separate configurations to 0.02 even once; the demo measures its budget at 0.05.
        var tolerance = Common.Tolerance(0.05);
        var twoSided = Common.TwoSided();
        var quiet = new Option<bool>("--quiet") { Description = "No progress bar." };
        var strategy = new Option<string>("--strategy") { Description = "random (configurations fixed in advance) or refine (adaptive: local search around the best value told).", DefaultValueFactory = _ => "random" };
        strategy.AcceptOnlyFromAmong("random", "refine");
        var guard = new Option<string?>("--guard") { Description = "Release scores to the search through a guard: exact, rounded:D, ladder:STEP or thresholdout:T,SIGMA,BUDGET." };
        var export = new Option<string?>("--export") { Description = "Write the scenario's days to this CSV (with --export-rows of them) and stop: data for 'accountant search'." };
        var exportRows = new Option<int>("--export-rows") { Description = "How many days --export writes.", DefaultValueFactory = _ => 5000 };
        var format = Common.Format("table", "json", "markdown");
        foreach (var option in new Option[] { export, exportRows, looks, seed, strategy, guard, trainingRows, validationRows, freshRows, confidence, tolerance, twoSided, quiet, format }) Options.Add(option);

        SetAction(r => Common.Guard(env, () =>
        {
            if (r.GetValue(export) is { } csv)
            {
                var rows = r.GetValue(exportRows);
                if (rows < 10) throw AccountantException.BadArguments("--export-rows must be at least 10.");
                try
                {
                    using var writer = new StreamWriter(csv, append: false, new System.Text.UTF8Encoding(false));
                    BakeryScenario.WriteCsv(BakeryScenario.Generate(rows, r.GetValue(seed)), writer);
                }
                catch (Exception e) when (e is IOException or UnauthorizedAccessException)
                {
                    throw AccountantException.BadArguments($"cannot write '{csv}' ({e.Message.TrimEnd('.')}); check the folder.");
                }

                env.Output.WriteLine($"wrote {Text.Count(rows)} invented bakery days to {csv} (label column sold_out)");
                return ExitCodes.Success;
            }

            var options = new DemoOptions
            {
                Looks = r.GetValue(looks),
                Seed = r.GetValue(seed),
                TrainingRows = r.GetValue(trainingRows),
                ValidationRows = r.GetValue(validationRows),
                FreshRows = r.GetValue(freshRows),
                Strategy = r.GetValue(strategy)!,
                Guard = r.GetValue(guard) is { } g ? Guards.GuardSpec.Parse(g) : null,
                Statement = Common.StatementOptions(r, confidence, tolerance, twoSided),
            };
            var path = r.GetValue(Common.LedgerOption) is { Length: > 0 } given
                ? given
                : Path.Combine(Path.GetTempPath(), $"accountant-demo-{env.Clock.GetUtcNow():yyyyMMdd-HHmmss}-{Guid.NewGuid().ToString("N")[..6]}.db");
            using var book = Bookkeeper.OpenOrCreate(path, env.Clock);
            var text = r.GetValue(format)!;
            if (text == "table")
            {
                env.Output.WriteLine($"Bakery demo: will a day's sourdough batch sell out? (an invented scenario with a known rule; data made by code)");
                var how = options.Strategy == "refine" ? "Refining search (adaptive)" : "Random search";
                var told = options.Guard is { } shown ? $", scores released through {shown}" : "";
                env.Output.WriteLine($"{how} over {options.Looks} configurations of {string.Join(", ", BinaryTrainers.DefaultSpace.Take(Math.Min(options.Looks, BinaryTrainers.DefaultSpace.Count)).Select(s => s.Trainer))}{told}");
                env.Output.WriteLine($"trained on {Text.Count(options.TrainingRows)} days, every look scored on the same {Text.Count(options.ValidationRows)} validation days; ledger {book.Store.Location}");
                env.Output.WriteLine();
                env.Output.Flush();
            }

            var progress = r.GetValue(quiet) ? null : new ProgressBar(env.Error, env.ErrorIsTerminal, "error");
            DemoOutcome outcome;
            using (CtrlC.Observe())
            {
                outcome = BakeryDemo.Run(book, options, progress, env.Cancel);
            }

            if (outcome.Search.Cancelled)
            {
                env.Error.WriteLine($"accountant: interrupted after {outcome.Search.Looks.Count} look(s); every finished look was kept and the statement below covers them.");
            }

            env.Output.Write(Render(outcome, text, book.Store.Location));
            return outcome.Search.Cancelled ? ExitCodes.Interrupted : ExitCodes.Success;
        }));
    }

    private static string Render(DemoOutcome outcome, string format, string path)
    {
        var s = outcome.Statement;
        if (format == "json")
        {
            return StatementWriter.JsonObject(w =>
            {
                w.WriteString("ledger", path);
                w.WriteBoolean("cancelled", outcome.Search.Cancelled);
                w.WritePropertyName("statement");
                StatementWriter.WriteJson(w, s);
                w.WriteStartObject("truth");
                w.WriteNumber("freshRows", outcome.FreshRows);
                WriteNumber(w, "selectedTrueError", outcome.SelectedTrueError);
                WriteNumber(w, "selectedTrueErrorStdErr", outcome.SelectedTrueErrorStdErr);
                WriteNumber(w, "bayesError", outcome.BayesError);
                if (s.Best is { } best) WriteNumber(w, "optimism", outcome.SelectedTrueError - best.Score);
                w.WriteEndObject();
            });
        }

        var body = StatementWriter.Render(s, format);
        if (s.Best is not { } selected || (double.IsNaN(outcome.SelectedTrueError) && outcome.Search.Cancelled))
        {
            return body;
        }

        var truth = new System.Text.StringBuilder();
        var bound = s.Primary!;
        var covered = bound.Bound >= outcome.SelectedTrueError;
        string Row(string label, string value) => $"  {label,-46} {value}";
        truth.AppendLine();
        truth.AppendLine(format == "markdown" ? "#### What only a simulation can show" : "What only a simulation can show (the scenario's rule is known)");
        if (format == "markdown") truth.AppendLine();
        if (double.IsNaN(outcome.SelectedTrueError))
        {
            var line = $"  the selected look #{selected.Number} was trained by an earlier run on this ledger, on other training days, so its true error is not measured here (a new ledger shows it)";
            return body + truth + (format == "markdown" ? "-" + line[1..] : line) + Environment.NewLine;
        }

        var lines = new[]
        {
            Row($"selected look #{selected.Number}, validation error", Text.N(selected.Score)),
            Row($"its true error on {Text.Count(outcome.FreshRows)} fresh days", $"{Text.N(outcome.SelectedTrueError)} ± {Text.N(outcome.SelectedTrueErrorStdErr)} (standard error)"),
            Row("optimism of the best validation score", Text.N(outcome.SelectedTrueError - selected.Score)),
            Row($"{bound.Method} bound at {Text.Percent(s.Options.Confidence)}", $"{Text.N(bound.Bound)}: {(covered ? "covers the true error" : "does NOT cover the true error (this happens in at most 5% of searches)")}"),
            Row("Bayes error (the best any model can do)", Text.N(outcome.BayesError)),
        };
        foreach (var line in lines) truth.AppendLine(format == "markdown" ? "-" + line[1..] : line);
        return body + truth;
    }

    private static void WriteNumber(System.Text.Json.Utf8JsonWriter w, string name, double value)
    {
        if (double.IsFinite(value)) w.WriteNumber(name, value); else w.WriteNull(name);
    }

}
