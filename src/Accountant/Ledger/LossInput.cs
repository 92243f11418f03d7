using System.Buffers.Binary;
using System.Globalization;
using Accountant.Comparisons;

namespace Accountant.Ledger;

/// <summary>Checks per-example losses given directly (not computed from predictions) and computes their score.</summary>
public static class LossInput
{
    /// <summary>
    /// The encoding and score of <paramref name="losses"/> for <paramref name="holdout"/>: a bitset of ⌈n/8⌉ bytes with the
    /// bits past n clear for 0/1 metrics, or 4·n bytes of finite float32 values inside the loss range otherwise.
    /// </summary>
    public static (LossEncoding Encoding, double Score) Check(Holdout holdout, byte[] losses)
    {
        var n = holdout.Size;
        if (holdout.Metric.IsZeroOne())
        {
            var bytes = (n + 7) / 8;
            if (losses.Length != bytes)
            {
                throw AccountantException.BadInput($"the loss bitset holds {losses.Length} bytes, but holdout '{holdout.Name}' has {n} examples and needs {bytes}; give one bit per example in id order.");
            }

            if (n % 8 != 0 && (losses[^1] >> (n % 8)) != 0)
            {
                throw AccountantException.BadInput($"the loss bitset sets bits past the holdout's {n} examples; clear the spare bits of its last byte.");
            }

            var errors = Bitsets.Count(losses);
            return (LossEncoding.Bitset, holdout.Metric == Metric.Accuracy ? (n - errors) / (double)n : errors / (double)n);
        }

        if (losses.Length != 4 * n)
        {
            throw AccountantException.BadInput($"the losses hold {losses.Length} bytes, but holdout '{holdout.Name}' has {n} examples and needs {4 * n} (one float32 each, in id order).");
        }

        double sum = 0;
        for (var i = 0; i < n; i++)
        {
            var loss = BinaryPrimitives.ReadSingleLittleEndian(losses.AsSpan(4 * i, 4));
            if (!float.IsFinite(loss) || loss < holdout.LossRange.Low || loss > holdout.LossRange.High)
            {
                throw AccountantException.BadInput($"the loss of example {i + 1} is {loss.ToString(CultureInfo.InvariantCulture)}, not a finite number inside the loss range of holdout '{holdout.Name}'; clip losses to the declared range.");
            }

            sum += loss;
        }

        return (LossEncoding.Float32, sum / n);
    }
}
