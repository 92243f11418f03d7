using Microsoft.ML;
using Microsoft.ML.Trainers;
using Microsoft.ML.Trainers.FastTree;
using Microsoft.ML.Trainers.LightGbm;

namespace Accountant.Search.Trainers;

/// <summary>
/// Binary classifiers from ML.NET with real hyperparameter ranges. The ranges are common practice for
/// gradient-boosted trees and regularized logistic regression (no single published source), wide enough
/// that a random search meets both underfitting and overfitting configurations.
/// </summary>
public static class BinaryTrainers
{
    public const string FastTree = "fasttree";
    public const string FastForest = "fastforest";
    public const string LightGbm = "lightgbm";
    public const string SdcaLogistic = "sdca-logistic";
    public const string LbfgsLogistic = "lbfgs-logistic";

    /// <summary>The binary trainers with their ranges (shared with the other tasks' spaces in <see cref="TrainerCatalog"/>).</summary>
    public static IReadOnlyList<TrainerSpace> DefaultSpace { get; } =
    [
        new(FastTree, TrainerCatalog.Trees),
        new(LightGbm, TrainerCatalog.Boosting),
        new(SdcaLogistic, TrainerCatalog.Linear),
        new(FastForest, TrainerCatalog.Forest),
        new(LbfgsLogistic, TrainerCatalog.LbfgsLinear),
    ];

    /// <summary>
    /// Draws <paramref name="count"/> configurations: trainers in turn (so every trainer is tried), hyperparameters at random.
    /// </summary>
    public static List<TrainerConfiguration> RandomConfigurations(IReadOnlyList<TrainerSpace> space, int count, int seed)
    {
        var random = new Random(seed);
        return Enumerable.Range(0, count).Select(i => space[i % space.Count].Sample(random)).ToList();
    }

    /// <summary>The ML.NET estimator for a configuration, reading "Label" (bool) and "Features".</summary>
    public static IEstimator<ITransformer> Build(MLContext ml, TrainerConfiguration c, int threads = 1) => c.Trainer switch
    {
        FastTree => ml.BinaryClassification.Trainers.FastTree(new FastTreeBinaryTrainer.Options
        {
            NumberOfLeaves = c.Int("leaves"),
            NumberOfTrees = c.Int("trees"),
            LearningRate = c.Double("learningRate"),
            MinimumExampleCountPerLeaf = c.Int("minLeaf"),
            NumberOfThreads = threads,
        }),
        FastForest => ml.BinaryClassification.Trainers.FastForest(new FastForestBinaryTrainer.Options
        {
            NumberOfLeaves = c.Int("leaves"),
            NumberOfTrees = c.Int("trees"),
            MinimumExampleCountPerLeaf = c.Int("minLeaf"),
            FeatureFraction = c.Double("featureFraction"),
            NumberOfThreads = threads,
        }),
        LightGbm => ml.BinaryClassification.Trainers.LightGbm(new LightGbmBinaryTrainer.Options
        {
            NumberOfLeaves = c.Int("leaves"),
            NumberOfIterations = c.Int("iterations"),
            LearningRate = c.Double("learningRate"),
            MinimumExampleCountPerLeaf = c.Int("minLeaf"),
            NumberOfThreads = threads,
            Seed = 1,
            Verbose = false,
            Silent = true,
        }),
        SdcaLogistic => ml.BinaryClassification.Trainers.SdcaLogisticRegression(new SdcaLogisticRegressionBinaryTrainer.Options
        {
            L2Regularization = (float)c.Double("l2"),
            L1Regularization = (float)c.Double("l1"),
            NumberOfThreads = threads,
        }),
        LbfgsLogistic => ml.BinaryClassification.Trainers.LbfgsLogisticRegression(new LbfgsLogisticRegressionBinaryTrainer.Options
        {
            L2Regularization = (float)c.Double("l2"),
            L1Regularization = (float)c.Double("l1"),
            NumberOfThreads = threads,
        }),
        _ => throw AccountantException.BadArguments($"unknown trainer '{c.Trainer}'; use one of {FastTree}, {FastForest}, {LightGbm}, {SdcaLogistic}, {LbfgsLogistic}."),
    };
}
