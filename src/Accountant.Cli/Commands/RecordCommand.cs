using System.CommandLine;
using System.Globalization;
using Accountant.Cli.Input;
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
        var format = Common.Format("table", "json");
        Arguments.Add(name);
        foreach (var option in new Option[] { configuration, predictions, score, search, stage, idColumn, predictionColumn, format }) Options.Add(option);

        SetAction(r => Common.Guard(env, () =>
        {
            var scoreText = r.GetValue(score);
            var predictionsPath = r.GetValue(predictions);
            if ((scoreText is null) == (predictionsPath is null))
            {
                throw AccountantException.BadArguments("give exactly one of --predictions FILE (preferred: enables paired tests) and --score X.");
            }

            double? value = null;
            if (scoreText is not null)
            {
                if (!double.TryParse(scoreText, NumberStyles.Float, CultureInfo.InvariantCulture, out var parsed))
                {
                    throw AccountantException.BadInput($"--score '{scoreText}' is not a number; write it with a '.' decimal point, such as 0.125.");
                }

                value = parsed;
            }

            var input = new LookInput
            {
                Configuration = InputFiles.Configuration(r.GetValue(configuration)!),
                Score = value,
                Predictions = predictionsPath is null ? null : InputFiles.Predictions(predictionsPath, r.GetValue(idColumn)!, r.GetValue(predictionColumn)!),
                Search = r.GetValue(search),
                Stage = r.GetValue(stage),
            };
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
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
                }));
            }
            else
            {
                env.Output.WriteLine($"look {look.Number} on holdout '{holdout.Name}': {holdout.Metric.Name()} {Text.N(look.Score)}{(look.HasLosses ? "" : " (score only)")}");
            }

            return ExitCodes.Success;
        }));
    }
}
