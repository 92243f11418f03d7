using System.Diagnostics.CodeAnalysis;

namespace Accountant;

/// <summary>The score a holdout is judged by.</summary>
public enum Metric
{
    /// <summary>Classification error: the mean 0/1 loss. Lower is better.</summary>
    Error,
    /// <summary>Classification accuracy, 1 − error. Higher is better; its bounds are lower bounds.</summary>
    Accuracy,
    /// <summary>Mean absolute error, each example's loss clipped to the declared range. Lower is better.</summary>
    AbsoluteError,
    /// <summary>Mean squared error, each example's loss clipped to the declared range. Lower is better.</summary>
    SquaredError,
    /// <summary>Area under the ROC curve of prediction scores against binary labels. Higher is better.</summary>
    Auc,
}

public static class MetricExtensions
{
    public static string Name(this Metric metric) => metric switch
    {
        Metric.Error => "error",
        Metric.Accuracy => "accuracy",
        Metric.AbsoluteError => "absolute-error",
        Metric.SquaredError => "squared-error",
        Metric.Auc => "auc",
        _ => throw new ArgumentOutOfRangeException(nameof(metric)),
    };

    /// <summary>True for metrics computed from 0/1 losses (error and accuracy).</summary>
    public static bool IsZeroOne(this Metric metric) => metric is Metric.Error or Metric.Accuracy;

    public static bool HigherIsBetter(this Metric metric) => metric is Metric.Accuracy or Metric.Auc;

    public static bool TryParse(string? text, [NotNullWhen(true)] out Metric? metric)
    {
        metric = text?.Trim().ToLowerInvariant() switch
        {
            "error" => Metric.Error,
            "accuracy" => Metric.Accuracy,
            "absolute-error" => Metric.AbsoluteError,
            "squared-error" => Metric.SquaredError,
            "auc" => Metric.Auc,
            _ => null,
        };
        return metric is not null;
    }

    public static Metric Parse(string text) =>
        TryParse(text, out var metric)
            ? metric.Value
            : throw AccountantException.BadArguments($"unknown metric '{text}'; use one of error, accuracy, absolute-error, squared-error, auc.");
}
