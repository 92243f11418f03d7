using Accountant.Search.Data;
using Accountant.Search.Trainers;
using Accountant.Statements;

namespace Accountant.Search.Demo;

/// <summary>The demo's sizes and seed.</summary>
public sealed record DemoOptions
{
    public int Looks { get; init; } = 60;
    public int TrainingRows { get; init; } = 2000;
    public int ValidationRows { get; init; } = 1000;
    public int FreshRows { get; init; } = 100_000;
    public int Seed { get; init; } = 2026;
    public string HoldoutName { get; init; } = "bakery-validation";

    /// <summary>"random" (non-adaptive) or "refine" (adaptive: local search around the best value told).</summary>
    public string Strategy { get; init; } = "random";

    /// <summary>The guard scores are released through; null tells the search the exact score.</summary>
    public Guards.GuardSpec? Guard { get; init; }
    public StatementOptions Statement { get; init; } = new();
}

/// <summary>What the demo found: the statement, and beside it the truth only a simulation can know.</summary>
/// <param name="SelectedTrueError">The selected model's error on <see cref="FreshRows"/> new rows drawn from the scenario.</param>
/// <param name="SelectedTrueErrorStdErr">The binomial standard error of that estimate.</param>
/// <param name="BayesError">The error of the best possible classifier on the same fresh rows (from the known rule).</param>
public sealed record DemoOutcome(
    Statement Statement,
    SearchOutcome Search,
    double SelectedTrueError,
    double SelectedTrueErrorStdErr,
    double BayesError,
    long FreshRows);

/// <summary>
/// The whole job on the invented bakery scenario: draw training and validation days, and run <see cref="TabularSearch"/> on
/// them as rows held in memory (the validation days registered as the holdout, every look recorded, no test set sealed);
/// then measure the selected model's true error on a large fresh sample, so the optimism of the best validation score and
/// the correction are seen side by side.
/// </summary>
public static class BakeryDemo
{
    public static DemoOutcome Run(Bookkeeper book, DemoOptions options, IProgress<SearchProgress>? progress = null, CancellationToken cancel = default)
    {
        if (options.Looks < 1 || options.TrainingRows < 10 || options.ValidationRows < 10 || options.FreshRows < 1000)
        {
            throw AccountantException.BadArguments("the demo needs at least 1 look, 10 training and 10 validation rows, and 1,000 fresh rows.");
        }

        if (options.Strategy is not ("random" or "refine"))
        {
            throw AccountantException.BadArguments($"unknown strategy '{options.Strategy}'; use random or refine.");
        }

        var training = BakeryScenario.Generate(options.TrainingRows, options.Seed, "train-");
        var validation = BakeryScenario.Generate(options.ValidationRows, options.Seed + 1, "day-");
        var search = new TabularSearch(book, book.Store.Location).Run(new TabularSearchOptions
        {
            DataPath = "bakery", Rows = BakeryScenario.Rows("the bakery scenario's training days", training),
            ValidationRows = BakeryScenario.Rows("the bakery scenario's validation days", validation),
            Label = "sold_out", IdColumn = "day", Task = TaskKind.Binary, TestFraction = 0, Seed = options.Seed,
            SpacePath = null, Strategy = options.Strategy, Looks = options.Looks, Guard = options.Guard, HoldoutName = options.HoldoutName,
            SearchLabel = $"demo-{options.Strategy}-seed{options.Seed}", Statement = options.Statement,
        }, progress, note: null, cancel);

        double trueError = double.NaN, stdErr = double.NaN, bayes = double.NaN;
        long rows = 0;
        if (search.Selected is { } selected)
        {
            var fresh = BakeryScenario.Generate(options.FreshRows, options.Seed + 2, "fresh-");
            (trueError, var scored) = selected.Score(BakeryScenario.Rows("the bakery scenario's fresh days", fresh));
            rows = scored;
            stdErr = Math.Sqrt(trueError * (1 - trueError) / rows);
            bayes = BakeryScenario.BayesError(fresh);
        }

        return new DemoOutcome(search.Statement, search.Search, trueError, stdErr, bayes, rows);
    }

}
