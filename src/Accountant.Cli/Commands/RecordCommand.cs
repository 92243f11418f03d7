using System.CommandLine;
using System.Globalization;
using Accountant.Cli.Input;
using Accountant.Guards;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class RecordCommand : Command
{
    public RecordCommand(CliEnvironment env)
        : base("record", "Record one look: a configuration scored on a holdout.\nExample: accountant record validation --configuration '{\"trainer\":\"fasttree\",\"leaves\":31}' --predictions preds.csv")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout the configuration was scored on." };
        var configuration = new Option<string>("--configuration") { Description = "The configuration as a JSON object, or @file.json.", Required = true };
        var predictions = new Option<string?>("--predictions") { Description = "CSV with id,prediction columns (and optionally label), one row per holdout example." };
        var score = new Option<string?>("--score") { Description = "The score, when only the score is known (no per-example losses)." };
        var search = new Option<string?>("--search") { Description = "A label grouping the looks of one search." };
        var stage = new Option<string?>("--stage") { Description = "The fidelity of a partial evaluation, e.g. 0.25 of the training budget." };
        var idColumn = new Option<string>("--id-column") { Description = "The predictions' id column.", DefaultValueFactory = _ => "id" };
        var predictionColumn = new Option<string>("--prediction-column") { Description = "The predictions' prediction column.", DefaultValueFactory = _ => "prediction" };
        var adaptive = new Option<bool>("--adaptive") { Description = "The configuration was chosen using earlier scores on this holdout." };
        var guard = new Option<string?>("--guard") { Description = "Release the score through a guard: exact, rounded:D, ladder:STEP or thresholdout:T,SIGMA,BUDGET." };
        var trainScore = new Option<string?>("--train-score") { Description = "The configuration's score on its training data (thresholdout compares against it)." };
        var stream = new Option<string?>("--stream") { Description = "The guard stream to release on (default: the one named by the guard's spelling); a stream keeps its guard." };
        var seed = new Option<ulong?>("--seed") { Description = "Seed of a new thresholdout stream's noise (recorded with the stream; later looks on it use the stream's own)." };
        var format = Common.Format("table", "json");
        Arguments.Add(name);
        foreach (var option in new Option[] { configuration, predictions, score, search, stage, adaptive, guard, stream, trainScore, seed, idColumn, predictionColumn, format }) Options.Add(option);

        SetAction(r => Common.Guard(env, () =>
        {
            var scoreText = r.GetValue(score);
            var predictionsPath = r.GetValue(predictions);
            if ((scoreText is null) == (predictionsPath is null))
            {
                throw AccountantException.BadArguments("give exactly one of --predictions FILE (preferred: enables paired tests) and --score X.");
            }

            var value = scoreText is null ? (double?)null : Number(scoreText, "--score");
            var train = r.GetValue(trainScore) is { } trainText ? Number(trainText, "--train-score") : (double?)null;
            var spec = r.GetValue(guard) is { } guardText ? GuardSpec.Parse(guardText) : null;

            var input = new LookInput
            {
                Configuration = InputFiles.Configuration(r.GetValue(configuration)!),
                Score = value,
                Predictions = predictionsPath is null ? null : InputFiles.Predictions(predictionsPath, r.GetValue(idColumn)!, r.GetValue(predictionColumn)!),
                Search = r.GetValue(search),
                Stage = r.GetValue(stage),
                Adaptive = r.GetValue(adaptive),
                Guard = spec,
                Stream = r.GetValue(stream),
                TrainScore = train,
            };
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            book.GuardSeed = r.GetValue(seed);
            var holdout = book.Holdout(r.GetValue(name)!);
            var look = book.RecordMany(holdout.Name, [input])[0];
            if (r.GetValue(format) == "json")
            {
                env.Output.Write(StatementWriter.JsonObject(w =>
                {
                    w.WriteString("holdout", holdout.Name);
                    w.WriteNumber("look", look.Number);
                    w.WriteNumber("observed", look.Score);
                    w.WriteBoolean("perExampleLosses", look.HasLosses);
                    w.WriteBoolean("adaptive", look.Adaptive);
                    if (look.Release is { } release)
                    {
                        w.WriteString("guard", release.Guard);
                        w.WriteString("stream", release.StreamName);
                        if (release.Value is { } v) w.WriteNumber("released", v); else w.WriteNull("released");
                        w.WriteBoolean("holdoutAnswered", release.HoldoutAnswered);
                    }
                }));
            }
            else
            {
                if (look.Release is { } release)
                {
                    // A guarded look tells the search only the released value; the score itself stays in the ledger.
                    var told = release.Value is { } v ? Text.N(v) : "refused (the guard's budget is spent)";
                    var on = release.StreamName == release.Guard ? "" : $" on stream '{release.StreamName}'";
                    env.Output.WriteLine($"look {look.Number} on holdout '{holdout.Name}'{(look.Adaptive ? " (adaptive)" : "")}: released {told} by {release.Guard}{on}");
                }
                else
                {
                    env.Output.WriteLine($"look {look.Number} on holdout '{holdout.Name}'{(look.Adaptive ? " (adaptive)" : "")}: {holdout.Metric.Name()} {Text.N(look.Score)}{(look.HasLosses ? "" : " (score only)")}");
                }
            }

            return ExitCodes.Success;
        }));
    }

    private static double Number(string text, string option) =>
        double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out var value)
            ? value
            : throw AccountantException.BadInput($"{option} '{text}' is not a number; write it with a '.' decimal point, such as 0.125.");
}
