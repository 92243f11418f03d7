using System.Text;
using Accountant.Ledger;
using Accountant.Search;
using Accountant.Search.Demo;
using Microsoft.ML;

namespace Accountant.Cli.Tests;

public sealed class MlNetApiTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    [Fact]
    public void The_mlnet_api_records_the_same_look_as_the_cli_given_the_same_predictions()
    {
        var ml = new MLContext(seed: 5);
        var training = ml.Data.LoadFromEnumerable(BakeryScenario.Generate(500, 1, "t-"));
        var validation = ml.Data.LoadFromEnumerable(BakeryScenario.Generate(200, 2, "v-"));
        var model = BakeryScenario.Featurizer(ml).Append(ml.BinaryClassification.Trainers.FastTree(numberOfLeaves: 8, numberOfTrees: 20)).Fit(training);

        // The library, from the model and the data view.
        var libraryLedger = Path.Combine(_cli.Folder, "library.db");
        Look fromApi;
        string apiFingerprint;
        byte[] apiLosses;
        using (var book = Bookkeeper.Create(libraryLedger))
        {
            apiFingerprint = book.RegisterHoldout(ml, "validation", validation).Fingerprint;
            fromApi = book.RecordModel(ml, "validation", model, validation, """{"trainer":"fasttree","leaves":8}""");
            apiLosses = book.Store.LossBytes(book.Holdout("validation"), fromApi.Number)!;
            // A data view with other rows is refused, and nothing is written.
            var other = ml.Data.LoadFromEnumerable(BakeryScenario.Generate(200, 3, "v-"));
            Assert.Equal(ErrorKind.BadInput, Assert.Throws<AccountantException>(() => book.RecordModel(ml, "validation", model, other, "{}")).Kind);
            Assert.Single(book.Store.Looks(book.Holdout("validation")));
        }

        // The command line, from the same model's predictions written as CSV.
        var ids = MlNetLooks.Texts(validation, "Id");
        var labels = MlNetLooks.Texts(validation, "Label");
        var predicted = MlNetLooks.Texts(model.Transform(validation), "PredictedLabel");
        var labelsCsv = _cli.Write("labels.csv", "id,label\n" + string.Concat(ids.Select((id, i) => $"{id},{labels[i]}\n")));
        var predictionsCsv = _cli.Write("predictions.csv", "id,prediction\n" + string.Concat(ids.Select((id, i) => $"{id},{predicted[i]}\n")));
        Assert.Equal(ExitCodes.Success, _cli.Run("init").Exit);
        Assert.Equal(ExitCodes.Success, _cli.Run("holdout", "add", "validation", "--labels", labelsCsv).Exit);
        Assert.Equal(ExitCodes.Success, _cli.Run("record", "validation", "--configuration", """{"trainer":"fasttree","leaves":8}""", "--predictions", predictionsCsv).Exit);

        using var cliBook = Bookkeeper.Open(_cli.Ledger);
        var holdout = cliBook.Holdout("validation");
        var fromCli = cliBook.Store.Looks(holdout).Single();
        Assert.Equal(apiFingerprint, holdout.Fingerprint);
        Assert.Equal(fromApi.Score, fromCli.Score);
        Assert.Equal(apiLosses, cliBook.Store.LossBytes(holdout, fromCli.Number));
        Assert.Equal(fromApi.ConfigurationDigest, fromCli.ConfigurationDigest);
    }

    [Fact]
    public void A_guarded_adaptive_loop_gets_the_released_value_back()
    {
        var ml = new MLContext(seed: 5);
        var training = ml.Data.LoadFromEnumerable(BakeryScenario.Generate(400, 1, "t-"));
        var validation = ml.Data.LoadFromEnumerable(BakeryScenario.Generate(300, 2, "v-"));
        using var book = Bookkeeper.Create(Path.Combine(_cli.Folder, "loop.db"));
        book.RegisterHoldout(ml, "validation", validation);
        var told = new List<double?>();
        foreach (var leaves in new[] { 4, 8, 16 })
        {
            var model = BakeryScenario.Featurizer(ml).Append(ml.BinaryClassification.Trainers.FastTree(numberOfLeaves: leaves, numberOfTrees: 20)).Fit(training);
            var look = book.RecordModel(ml, "validation", model, validation, $"{{\"leaves\":{leaves}}}", guard: Guards.GuardSpec.Ladder(0.05), adaptive: leaves > 4);
            told.Add(look.Release!.Value);
            // The Ladder's released value is on its 0.05 grid.
            Assert.Equal(0.0, Math.Round(look.Release.Value!.Value / 0.05, 9) % 1, 9);
        }

        Assert.Equal(3, told.Count);
        Assert.Equal("adaptive-transcript", book.Statement("validation").Primary!.Method);
    }
}
