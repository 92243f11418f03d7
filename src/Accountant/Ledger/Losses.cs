using System.Buffers.Binary;
using System.Globalization;
using Accountant.Bounds;

namespace Accountant.Ledger;

/// <summary>One model prediction for one holdout example, optionally with the label the predictor saw.</summary>
public readonly record struct Prediction(string Id, string Value, string? Label = null);

/// <summary>Per-example losses of one look, in the holdout's id order, with their mean.</summary>
public sealed record LossVector(LossEncoding Encoding, byte[] Bytes, double Score, int Size)
{
    /// <summary>The loss of example i (0 or 1 for bitsets).</summary>
    public double this[int i] => Encoding switch
    {
        LossEncoding.Bitset => (Bytes[i >> 3] >> (i & 7)) & 1,
        LossEncoding.Float32 or LossEncoding.Scores => BinaryPrimitives.ReadSingleLittleEndian(Bytes.AsSpan(4 * i, 4)),
        _ => throw new InvalidOperationException("no per-example losses"),
    };
}

/// <summary>Turns predictions into per-example losses against a holdout's labels, refusing anything that does not match.</summary>
public static class Losses
{
    /// <summary>
    /// Checks that the predictions cover exactly the holdout's ids (each once), that any labels given equal the holdout's,
    /// and computes the losses. For error and accuracy the loss is 1 when the canonical prediction differs from the label;
    /// for absolute and squared error it is |y − ŷ| or (y − ŷ)², clipped to the loss range and stored as float32,
    /// and the score is the mean of the stored float32 values so that it can be recomputed exactly.
    /// </summary>
    public static LossVector Compute(Holdout holdout, IReadOnlyList<HoldoutExample> examples, IReadOnlyList<Prediction> predictions)
    {
        var index = new Dictionary<string, int>(examples.Count, StringComparer.Ordinal);
        for (var i = 0; i < examples.Count; i++) index[examples[i].Id] = i;

        var seen = new string?[examples.Count];
        for (var k = 0; k < predictions.Count; k++)
        {
            var prediction = predictions[k];
            var id = prediction.Id.Trim();
            if (!index.TryGetValue(id, out var i))
            {
                throw AccountantException.BadInput($"the predictions name id '{Shorten(id)}', which is not in holdout '{holdout.Name}'; predictions must cover exactly the holdout's ids (they belong to a different holdout otherwise).");
            }

            if (seen[i] is not null)
            {
                throw AccountantException.BadInput($"the predictions give id '{Shorten(id)}' more than once; give one prediction per holdout example.");
            }

            if (prediction.Label is { } label && Fingerprint.CanonicalLabel(label) != examples[i].Label)
            {
                throw AccountantException.BadInput($"the predictions give label '{Shorten(label)}' for id '{Shorten(id)}' but holdout '{holdout.Name}' has '{Shorten(examples[i].Label)}'; these predictions were made for a different holdout.");
            }

            seen[i] = prediction.Value;
        }

        var missing = Array.IndexOf(seen, null);
        if (missing >= 0)
        {
            var count = seen.Count(s => s is null);
            throw AccountantException.BadInput($"the predictions miss {count} of holdout '{holdout.Name}''s {examples.Count} ids (the first is '{Shorten(examples[missing].Id)}'); give a prediction for every example.");
        }

        return holdout.Metric switch
        {
            Metric.Error or Metric.Accuracy => ZeroOne(holdout, examples, seen!),
            Metric.Auc => Scores(holdout, examples, seen!),
            _ => Bounded(holdout, examples, seen!),
        };
    }

    private static LossVector ZeroOne(Holdout holdout, IReadOnlyList<HoldoutExample> examples, string[] predictions)
    {
        var bits = new byte[(examples.Count + 7) / 8];
        long errors = 0;
        for (var i = 0; i < examples.Count; i++)
        {
            var predicted = Fingerprint.CanonicalLabel(predictions[i]);
            if (predicted.Length == 0)
            {
                throw AccountantException.BadInput($"the prediction for id '{Shorten(examples[i].Id)}' is empty; give a class label for every example.");
            }

            if (!string.Equals(predicted, examples[i].Label, StringComparison.Ordinal))
            {
                bits[i >> 3] |= (byte)(1 << (i & 7));
                errors++;
            }
        }

        var error = errors / (double)examples.Count;
        var score = holdout.Metric == Metric.Accuracy ? (examples.Count - errors) / (double)examples.Count : error;
        return new LossVector(LossEncoding.Bitset, bits, score, examples.Count);
    }

    private static LossVector Bounded(Holdout holdout, IReadOnlyList<HoldoutExample> examples, string[] predictions)
    {
        var bytes = new byte[4 * examples.Count];
        double sum = 0;
        for (var i = 0; i < examples.Count; i++)
        {
            if (!double.TryParse(predictions[i].Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out var predicted) || !double.IsFinite(predicted))
            {
                throw AccountantException.BadInput($"the prediction '{Shorten(predictions[i])}' for id '{Shorten(examples[i].Id)}' is not a finite number; {holdout.Metric.Name()} needs numeric predictions written with a '.' decimal point.");
            }

            var label = double.Parse(examples[i].Label, NumberStyles.Float, CultureInfo.InvariantCulture);
            var difference = predicted - label;
            var loss = holdout.Metric == Metric.SquaredError ? difference * difference : Math.Abs(difference);
            var stored = (float)holdout.LossRange.Clip(loss);
            BinaryPrimitives.WriteSingleLittleEndian(bytes.AsSpan(4 * i, 4), stored);
            sum += stored;
        }

        return new LossVector(LossEncoding.Float32, bytes, sum / examples.Count, examples.Count);
    }

    /// <summary>The label text AUC holdouts use for the positive class.</summary>
    public const string PositiveLabel = "1";

    private static LossVector Scores(Holdout holdout, IReadOnlyList<HoldoutExample> examples, string[] predictions)
    {
        var bytes = new byte[4 * examples.Count];
        var scores = new double[examples.Count];
        var positive = new bool[examples.Count];
        for (var i = 0; i < examples.Count; i++)
        {
            if (!float.TryParse(predictions[i].Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out var score) || !float.IsFinite(score))
            {
                throw AccountantException.BadInput($"the prediction '{Shorten(predictions[i])}' for id '{Shorten(examples[i].Id)}' is not a finite number; auc needs a score per example (higher meaning more likely positive), written with a '.' decimal point.");
            }

            BinaryPrimitives.WriteSingleLittleEndian(bytes.AsSpan(4 * i, 4), score);
            scores[i] = score;
            positive[i] = examples[i].Label == PositiveLabel;
        }

        return new LossVector(LossEncoding.Scores, bytes, Bounds.AucUnion.Compute(scores, positive), examples.Count);
    }

    /// <summary>Reads back the mean of a stored loss vector, the way <see cref="Compute"/> produced it.</summary>
    public static double Mean(Holdout holdout, LossEncoding encoding, byte[] bytes)
    {
        var vector = new LossVector(encoding, bytes, double.NaN, holdout.Size);
        double sum = 0;
        for (var i = 0; i < holdout.Size; i++) sum += vector[i];
        var mean = sum / holdout.Size;
        return encoding == LossEncoding.Bitset && holdout.Metric == Metric.Accuracy ? (holdout.Size - sum) / holdout.Size : mean;
    }

    /// <summary>Checks a score given without predictions: finite and inside the metric's range.</summary>
    public static void CheckScore(Holdout holdout, double score)
    {
        var range = holdout.Metric.IsZeroOne() || holdout.Metric == Metric.Auc ? LossRange.Unit : holdout.LossRange;
        if (!double.IsFinite(score))
        {
            throw AccountantException.BadInput($"the score {score.ToString(CultureInfo.InvariantCulture)} is not a finite number; give the look's {holdout.Metric.Name()} on holdout '{holdout.Name}'.");
        }

        if (score < range.Low || score > range.High)
        {
            throw AccountantException.BadInput($"the score {score.ToString(CultureInfo.InvariantCulture)} lies outside [{range.Low.ToString(CultureInfo.InvariantCulture)}, {range.High.ToString(CultureInfo.InvariantCulture)}], the range of {holdout.Metric.Name()} on holdout '{holdout.Name}'; give the score itself, not a percentage or another metric.");
        }
    }

    internal static string Shorten(string text) => Printable(text.Length <= 60 ? text : text[..57] + "...");

    /// <summary>Shows control characters as escapes (\n, \r, \t, \u0000), so an error quoting input stays on one line.</summary>
    internal static string Printable(string text)
    {
        if (!text.Any(char.IsControl)) return text;
        var b = new System.Text.StringBuilder(text.Length + 8);
        foreach (var c in text)
        {
            b.Append(c switch
            {
                '\n' => "\\n",
                '\r' => "\\r",
                '\t' => "\\t",
                _ when char.IsControl(c) => $"\\u{(int)c:x4}",
                _ => c.ToString(),
            });
        }

        return b.ToString();
    }
}
