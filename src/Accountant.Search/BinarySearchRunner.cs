using System.Diagnostics;
using System.Globalization;
using Accountant.Ledger;
using Accountant.Search.Trainers;
using Microsoft.ML;

namespace Accountant.Search;

/// <summary>One configuration trained and scored: the look the ledger recorded, with its model.</summary>
public sealed record ScoredConfiguration(Look Look, TrainerConfiguration Configuration, double Seconds);

/// <summary>What a search did. <see cref="Cancelled"/> is set when it stopped early; every finished look is in the ledger.</summary>
public sealed record SearchOutcome(IReadOnlyList<ScoredConfiguration> Looks, ScoredConfiguration? Best, ITransformer? BestModel, bool Cancelled);

/// <summary>
/// Runs a non-adaptive search for a binary classifier: every configuration is fixed before any score is seen,
/// each is trained on the training data, scored on the holdout, and recorded in the ledger as one look with its
/// per-example losses, before the next begins. Data views carry a bool "Label" column; <paramref name="featurize"/>
/// turns them into a "Features" vector.
/// </summary>
public sealed class BinarySearchRunner(MLContext ml, IEstimator<ITransformer> featurize)
{
    private sealed class PredictedRow
    {
        public bool PredictedLabel { get; set; }
    }

    /// <summary>The label text the ledger stores for a bool label.</summary>
    public static string LabelText(bool label) => label ? "1" : "0";

    public SearchOutcome Run(
        Bookkeeper book,
        Holdout holdout,
        IDataView train,
        IDataView validation,
        IReadOnlyList<string> validationIds,
        IReadOnlyList<TrainerConfiguration> configurations,
        string search,
        IProgress<SearchProgress>? progress = null,
        CancellationToken cancel = default) =>
        Run(book, holdout, train, validation, validationIds, new FixedPlan(configurations), configurations.Count, search, null, progress, cancel);

    private sealed class FixedPlan(IReadOnlyList<TrainerConfiguration> plan) : ISearchStrategy
    {
        public (TrainerConfiguration, bool) Next(int index, IReadOnlyList<ToldLook> history) => (plan[index], false);
    }

    /// <summary>
    /// Runs <paramref name="looks"/> looks chosen by <paramref name="strategy"/>. With a <paramref name="guard"/>, every score
    /// is released through it and the strategy is told only the released value; without one it is told the score.
    /// </summary>
    public SearchOutcome Run(
        Bookkeeper book,
        Holdout holdout,
        IDataView train,
        IDataView validation,
        IReadOnlyList<string> validationIds,
        ISearchStrategy strategy,
        int looks,
        string search,
        Guards.GuardSpec? guard,
        IProgress<SearchProgress>? progress = null,
        CancellationToken cancel = default)
    {
        var told = new List<ToldLook>();
        var clock = Stopwatch.StartNew();
        var scoredLooks = new List<ScoredConfiguration>();
        ScoredConfiguration? best = null;
        ITransformer? bestModel = null;
        var featurizer = featurize.Fit(train);
        var trainFeatures = featurizer.Transform(train);
        var validationFeatures = featurizer.Transform(validation);
        for (var i = 0; i < looks; i++)
        {
            var (configuration, adaptive) = strategy.Next(i, told);
            progress?.Report(new SearchProgress(i, looks, best?.Look.Score, clock.Elapsed, configuration.Trainer));
            if (cancel.IsCancellationRequested)
            {
                return new SearchOutcome(scoredLooks, best, bestModel, Cancelled: true);
            }

            var started = clock.Elapsed;
            var model = Fit(configuration, trainFeatures);
            var predicted = ml.Data.CreateEnumerable<PredictedRow>(model.Transform(validationFeatures), reuseRowObject: false)
                .Select((row, j) => new Prediction(validationIds[j], LabelText(row.PredictedLabel)))
                .ToList();
            var seconds = (clock.Elapsed - started).TotalSeconds;
            double? trainScore = null;
            if (guard?.Kind == Guards.GuardKind.Thresholdout)
            {
                trainScore = Error(model, trainFeatures, out _);
                if (holdout.Metric == Metric.Accuracy) trainScore = 1 - trainScore;
            }

            var look = book.RecordMany(holdout.Name,
            [
                new LookInput
                {
                    Configuration = configuration.ToJson(), Predictions = predicted, Search = search, Seconds = Math.Round(seconds, 3),
                    Adaptive = adaptive, Guard = guard, TrainScore = trainScore,
                },
            ])[0];
            told.Add(new ToldLook(configuration, look.Release is { } r ? r.Value : look.Score));
            var scored = new ScoredConfiguration(look, configuration, seconds);
            scoredLooks.Add(scored);
            if (best is null || (holdout.Metric.HigherIsBetter() ? look.Score > best.Look.Score : look.Score < best.Look.Score))
            {
                best = scored;
                bestModel = featurizer.Append(model);
            }
        }

        progress?.Report(new SearchProgress(looks, looks, best?.Look.Score, clock.Elapsed, "done"));
        return new SearchOutcome(scoredLooks, best, bestModel, Cancelled: false);
    }

    private ITransformer Fit(TrainerConfiguration configuration, IDataView features) =>
        TrainerCatalog.Build(ml, Data.TaskKind.Binary, configuration).Fit(features);

    /// <summary>The 0/1 error of a model on a data view with a bool "Label" column.</summary>
    public double Error(ITransformer model, IDataView data, out long rows)
    {
        var scored = model.Transform(data);
        long wrong = 0, count = 0;
        using (var cursor = scored.GetRowCursor(scored.Schema.Where(c => c.Name is "Label" or "PredictedLabel")))
        {
            var label = cursor.GetGetter<bool>(scored.Schema["Label"]);
            var predicted = cursor.GetGetter<bool>(scored.Schema["PredictedLabel"]);
            bool y = false, yHat = false;
            while (cursor.MoveNext())
            {
                label(ref y);
                predicted(ref yHat);
                count++;
                if (y != yHat) wrong++;
            }
        }

        rows = count;
        return wrong / (double)count;
    }

    internal static string Format(double value) => value.ToString("0.####", CultureInfo.InvariantCulture);
}
