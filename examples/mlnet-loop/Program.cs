// A training loop of its own, accounted for through the ML.NET API: an invented scenario (the bakery days the demo
// uses, made by code), a validation set registered as a holdout, a few models trained by hand, one look each, and the
// statement at the end. The last two models are chosen after seeing released scores, so they are adaptive looks, and
// their scores are released through the Ladder.
using System.Globalization;
using Accountant;
using Accountant.Guards;
using Accountant.Search;
using Accountant.Search.Demo;
using Microsoft.ML;

CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
var ledger = args.Length > 0 ? args[0] : Path.Combine(Path.GetTempPath(), $"mlnet-loop-{Guid.NewGuid():N}.db");
var ml = new MLContext(seed: 7);
var training = ml.Data.LoadFromEnumerable(BakeryScenario.Generate(2000, 21, "train-"));
var validation = ml.Data.LoadFromEnumerable(BakeryScenario.Generate(1500, 22, "day-"));

using var book = Bookkeeper.Create(ledger);
book.RegisterHoldout(ml, "loop-validation", validation);
var ladder = GuardSpec.Ladder(0.01);

// Three fixed candidates, then two chosen from what the Ladder told.
var candidates = new List<(int Leaves, int Trees)> { (4, 50), (16, 100), (64, 200) };
double? bestTold = null;
(int Leaves, int Trees) bestCandidate = candidates[0];
for (var i = 0; i < candidates.Count + 2; i++)
{
    var adaptive = i >= candidates.Count;
    var (leaves, trees) = adaptive ? (Math.Max(2, bestCandidate.Leaves / 2 + 4 * (i - candidates.Count)), bestCandidate.Trees + 50) : candidates[i];
    var model = BakeryScenario.Featurizer(ml)
        .Append(ml.BinaryClassification.Trainers.FastTree(numberOfLeaves: leaves, numberOfTrees: trees, minimumExampleCountPerLeaf: 10))
        .Fit(training);
    var look = book.RecordModel(ml, "loop-validation", model, validation, $"{{\"trainer\":\"fasttree\",\"leaves\":{leaves},\"trees\":{trees}}}",
        guard: ladder, adaptive: adaptive, search: "hand-loop");
    var told = look.Release!.Value;
    Console.WriteLine($"look {look.Number}{(adaptive ? " (adaptive)" : "")}: leaves {leaves}, trees {trees}; told {told?.ToString("0.00") ?? "nothing"}");
    if (told is { } t && (bestTold is null || t < bestTold))
    {
        bestTold = t;
        bestCandidate = (leaves, trees);
    }
}

var statement = book.Statement("loop-validation");
Console.WriteLine();
Console.WriteLine($"{statement.Looks} looks ({statement.AdaptiveLooks} adaptive), ln M_eff = {statement.LogEffectiveLooks:0.00}");
Console.WriteLine($"best look #{statement.Best!.Number}: validation error {statement.Best.Score:0.0000}");
foreach (var bound in statement.Bounds)
{
    Console.WriteLine($"  {bound.Method}: true error at most {bound.Bound:0.0000} with {statement.Options.Confidence * 100:0}% confidence");
}

foreach (var warning in statement.Warnings)
{
    Console.WriteLine($"  {warning.Code}: {warning.Message}");
}

Console.WriteLine($"chain head {statement.ChainHead}; ledger {ledger}");
