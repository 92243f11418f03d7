using Accountant.Search.Data;
using Microsoft.ML;
using Microsoft.ML.Trainers;
using Microsoft.ML.Trainers.FastTree;
using Microsoft.ML.Trainers.LightGbm;

namespace Accountant.Search.Trainers;

/// <summary>
/// The trainers for each task with their default hyperparameter ranges (common practice for boosted trees, forests and
/// regularized linear models; no single published source). Every estimator reads "Label" and "Features".
/// </summary>
public static class TrainerCatalog
{
    public const string SdcaMaxEnt = "sdca-maxent";
    public const string LbfgsMaxEnt = "lbfgs-maxent";
    public const string FastTreeOva = "fasttree-ova";
    public const string Sdca = "sdca";

    internal static readonly ParameterRange[] Trees =
    [
        new("leaves", 2, 128, ParameterScale.LogInteger),
        new("trees", 10, 300, ParameterScale.LogInteger),
        new("learningRate", 0.01, 0.5, ParameterScale.LogUniform),
        new("minLeaf", 1, 100, ParameterScale.LogInteger),
    ];

    internal static readonly ParameterRange[] Boosting =
    [
        new("leaves", 2, 128, ParameterScale.LogInteger),
        new("iterations", 10, 300, ParameterScale.LogInteger),
        new("learningRate", 0.01, 0.5, ParameterScale.LogUniform),
        new("minLeaf", 1, 100, ParameterScale.LogInteger),
    ];

    internal static readonly ParameterRange[] Forest =
    [
        new("leaves", 2, 128, ParameterScale.LogInteger),
        new("trees", 10, 200, ParameterScale.LogInteger),
        new("minLeaf", 1, 100, ParameterScale.LogInteger),
        new("featureFraction", 0.3, 1.0, ParameterScale.Uniform),
    ];

    internal static readonly ParameterRange[] Linear =
    [
        new("l2", 1e-6, 10, ParameterScale.LogUniform),
        new("l1", 1e-6, 1, ParameterScale.LogUniform),
    ];

    internal static readonly ParameterRange[] LbfgsLinear =
    [
        new("l2", 1e-4, 10, ParameterScale.LogUniform),
        new("l1", 1e-4, 10, ParameterScale.LogUniform),
    ];

    public static IReadOnlyList<TrainerSpace> DefaultSpace(TaskKind task) => task switch
    {
        TaskKind.Binary => BinaryTrainers.DefaultSpace,
        TaskKind.Multiclass =>
        [
            new(BinaryTrainers.LightGbm, Boosting),
            new(SdcaMaxEnt, Linear),
            new(LbfgsMaxEnt, LbfgsLinear),
            new(FastTreeOva, Trees),
        ],
        _ =>
        [
            new(BinaryTrainers.FastTree, Trees),
            new(BinaryTrainers.LightGbm, Boosting),
            new(BinaryTrainers.FastForest, Forest),
            new(Sdca, Linear),
        ],
    };

    public static bool NeedsNormalization(string trainer) => trainer is BinaryTrainers.SdcaLogistic or BinaryTrainers.LbfgsLogistic or SdcaMaxEnt or LbfgsMaxEnt or Sdca;

    public static IEstimator<ITransformer> Build(MLContext ml, TaskKind task, TrainerConfiguration c)
    {
        IEstimator<ITransformer> trainer = task switch
        {
            TaskKind.Binary => BinaryTrainers.Build(ml, c),
            TaskKind.Multiclass => Multiclass(ml, c),
            _ => Regression(ml, c),
        };
        return NeedsNormalization(c.Trainer) ? ml.Transforms.NormalizeMinMax("Features").Append(trainer) : trainer;
    }

    private static IEstimator<ITransformer> Multiclass(MLContext ml, TrainerConfiguration c) => c.Trainer switch
    {
        BinaryTrainers.LightGbm => ml.MulticlassClassification.Trainers.LightGbm(new LightGbmMulticlassTrainer.Options
        {
            NumberOfLeaves = c.Int("leaves"), NumberOfIterations = c.Int("iterations"), LearningRate = c.Double("learningRate"),
            MinimumExampleCountPerLeaf = c.Int("minLeaf"), NumberOfThreads = 1, Seed = 1, Verbose = false, Silent = true,
        }),
        SdcaMaxEnt => ml.MulticlassClassification.Trainers.SdcaMaximumEntropy(new SdcaMaximumEntropyMulticlassTrainer.Options
        {
            L2Regularization = (float)c.Double("l2"), L1Regularization = (float)c.Double("l1"), NumberOfThreads = 1,
        }),
        LbfgsMaxEnt => ml.MulticlassClassification.Trainers.LbfgsMaximumEntropy(new LbfgsMaximumEntropyMulticlassTrainer.Options
        {
            L2Regularization = (float)c.Double("l2"), L1Regularization = (float)c.Double("l1"), NumberOfThreads = 1,
        }),
        FastTreeOva => ml.MulticlassClassification.Trainers.OneVersusAll(ml.BinaryClassification.Trainers.FastTree(new FastTreeBinaryTrainer.Options
        {
            NumberOfLeaves = c.Int("leaves"), NumberOfTrees = c.Int("trees"), LearningRate = c.Double("learningRate"),
            MinimumExampleCountPerLeaf = c.Int("minLeaf"), NumberOfThreads = 1,
        })),
        _ => throw Unknown(c, TaskKind.Multiclass),
    };

    private static IEstimator<ITransformer> Regression(MLContext ml, TrainerConfiguration c) => c.Trainer switch
    {
        BinaryTrainers.FastTree => ml.Regression.Trainers.FastTree(new FastTreeRegressionTrainer.Options
        {
            NumberOfLeaves = c.Int("leaves"), NumberOfTrees = c.Int("trees"), LearningRate = c.Double("learningRate"),
            MinimumExampleCountPerLeaf = c.Int("minLeaf"), NumberOfThreads = 1,
        }),
        BinaryTrainers.LightGbm => ml.Regression.Trainers.LightGbm(new LightGbmRegressionTrainer.Options
        {
            NumberOfLeaves = c.Int("leaves"), NumberOfIterations = c.Int("iterations"), LearningRate = c.Double("learningRate"),
            MinimumExampleCountPerLeaf = c.Int("minLeaf"), NumberOfThreads = 1, Seed = 1, Verbose = false, Silent = true,
        }),
        BinaryTrainers.FastForest => ml.Regression.Trainers.FastForest(new FastForestRegressionTrainer.Options
        {
            NumberOfLeaves = c.Int("leaves"), NumberOfTrees = c.Int("trees"), MinimumExampleCountPerLeaf = c.Int("minLeaf"),
            FeatureFraction = c.Double("featureFraction"), NumberOfThreads = 1,
        }),
        Sdca => ml.Regression.Trainers.Sdca(new SdcaRegressionTrainer.Options
        {
            L2Regularization = (float)c.Double("l2"), L1Regularization = (float)c.Double("l1"), NumberOfThreads = 1,
        }),
        _ => throw Unknown(c, TaskKind.Regression),
    };

    private static AccountantException Unknown(TrainerConfiguration c, TaskKind task) => AccountantException.BadArguments(
        $"the trainer '{c.Trainer}' is not available for {task.ToString().ToLowerInvariant()} tasks; use one of {string.Join(", ", DefaultSpace(task).Select(s => s.Trainer))}.");
}
