using Accountant.Ledger;
using Accountant.Search.Trainers;
using Accountant.Statements;
using Microsoft.ML;

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
/// The whole job on the invented bakery scenario: draw training and validation days, register the validation days
/// as a holdout, run a real ML.NET random search recording every look, then measure the selected model's true error
/// on a large fresh sample, so the optimism of the best validation score and the correction are seen side by side.
/// </summary>
public static class DemoRunner
{
    public static IEstimator<ITransformer> Featurizer(MLContext ml) =>
        ml.Transforms.Categorical.OneHotEncoding("WeekdayOneHot", nameof(BakeryDay.Weekday))
            .Append(ml.Transforms.Concatenate("Features", "WeekdayOneHot", nameof(BakeryDay.Temperature), nameof(BakeryDay.Rain),
                nameof(BakeryDay.StreetEvent), nameof(BakeryDay.Loaves), nameof(BakeryDay.Price), nameof(BakeryDay.HoursOpen)));

    public static DemoOutcome Run(Bookkeeper book, DemoOptions options, IProgress<SearchProgress>? progress = null, CancellationToken cancel = default)
    {
        if (options.Looks < 1 || options.TrainingRows < 10 || options.ValidationRows < 10 || options.FreshRows < 1000)
        {
            throw AccountantException.BadArguments("the demo needs at least 1 look, 10 training and 10 validation rows, and 1,000 fresh rows.");
        }

        var ml = new MLContext(options.Seed);
        var training = BakeryScenario.Generate(options.TrainingRows, options.Seed, "train-");
        var validation = BakeryScenario.Generate(options.ValidationRows, options.Seed + 1, "day-");
        var holdout = book.EnsureHoldout(options.HoldoutName,
            validation.Select(d => new HoldoutExample(d.Id, BinarySearchRunner.LabelText(d.Label))).ToList());

        ISearchStrategy strategy = options.Strategy switch
        {
            "random" => new RandomStrategy(BinaryTrainers.DefaultSpace, options.Looks, options.Seed),
            "refine" => new RefineStrategy(BinaryTrainers.DefaultSpace, options.Looks, options.Seed),
            _ => throw AccountantException.BadArguments($"unknown strategy '{options.Strategy}'; use random or refine."),
        };
        var runner = new BinarySearchRunner(ml, Featurizer(ml));
        var search = runner.Run(book, holdout, ml.Data.LoadFromEnumerable(training), ml.Data.LoadFromEnumerable(validation),
            validation.Select(d => d.Id).ToList(), strategy, options.Looks, $"demo-{options.Strategy}-seed{options.Seed}", options.Guard, progress, cancel);

        double trueError = double.NaN, stdErr = double.NaN, bayes = double.NaN;
        long rows = 0;
        if (search.BestModel is { } model)
        {
            var fresh = BakeryScenario.Generate(options.FreshRows, options.Seed + 2, "fresh-");
            trueError = runner.Error(model, ml.Data.LoadFromEnumerable(fresh), out rows);
            stdErr = Math.Sqrt(trueError * (1 - trueError) / rows);
            bayes = BakeryScenario.BayesError(fresh);
        }

        return new DemoOutcome(book.Statement(holdout.Name, options.Statement), search, trueError, stdErr, bayes, rows);
    }
}
