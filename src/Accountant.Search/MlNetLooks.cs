using System.Globalization;
using Accountant.Guards;
using Accountant.Ledger;
using Microsoft.ML;
using Microsoft.ML.Data;

namespace Accountant.Search;

/// <summary>Which columns of a data view hold the example ids, the labels and the model's output.</summary>
/// <param name="Id">The id column (text or a number).</param>
/// <param name="Label">The label column (bool, text, key or a number).</param>
/// <param name="Prediction">The model's output: by default PredictedLabel for error and accuracy, Score for the other metrics.</param>
public sealed record DataViewColumns(string Id = "Id", string Label = "Label", string? Prediction = null);

/// <summary>
/// Accounting for models trained in your own <see cref="MLContext"/> loop: register a validation data view as a holdout,
/// and record a look from a trained <see cref="ITransformer"/> in one call. Values are turned into the ledger's text the
/// same way in both, so the labels the model was scored against are checked against the registered holdout.
/// </summary>
/// <example>
/// <code>
/// book.RegisterHoldout(ml, "validation", validationView);
/// foreach (var options in candidates)
/// {
///     var model = pipeline(options).Fit(trainingView);
///     var look = book.RecordModel(ml, "validation", model, validationView, options.ToJson(), guard: GuardSpec.Ladder(0.01), adaptive: true);
///     Console.WriteLine($"look {look.Number}: told {look.Release?.Value}");
/// }
/// </code>
/// </example>
public static class MlNetLooks
{
    /// <summary>Registers the rows of <paramref name="validation"/> (ids and labels) as a holdout.</summary>
    public static Holdout RegisterHoldout(this Bookkeeper book, MLContext ml, string name, IDataView validation, Metric metric = Metric.Error,
        Bounds.LossRange? lossRange = null, DataViewColumns? columns = null)
    {
        columns ??= new DataViewColumns();
        var (ids, labels) = IdsAndLabels(validation, columns);
        return book.RegisterHoldout(name, ids.Select((id, i) => new HoldoutExample(id, labels[i])).ToList(), metric, lossRange);
    }

    /// <summary>
    /// Scores <paramref name="model"/> on <paramref name="validation"/> and records the look: per-example losses from the model's
    /// predictions, the holdout's ids and labels checked against the rows (a different data view is refused), and, with a
    /// guard, the released value in <see cref="Look.Release"/> for an adaptive loop to use.
    /// </summary>
    public static Look RecordModel(this Bookkeeper book, MLContext ml, string holdout, ITransformer model, IDataView validation, string configuration,
        DataViewColumns? columns = null, GuardSpec? guard = null, bool adaptive = false, double? trainScore = null, string? search = null, string? stage = null)
    {
        columns ??= new DataViewColumns();
        var registered = book.Holdout(holdout);
        var (ids, labels) = IdsAndLabels(validation, columns);
        var sorted = ids.Select((id, i) => new HoldoutExample(id.Trim(), Fingerprint.CanonicalLabel(labels[i]))).OrderBy(e => e.Id, StringComparer.Ordinal).ToList();
        if (Fingerprint.Compute(sorted) != registered.Fingerprint)
        {
            throw AccountantException.BadInput($"the data view's ids and labels do not match holdout '{registered.Name}' (its fingerprint differs); score the model on the rows the holdout was registered from.");
        }

        var scored = model.Transform(validation);
        var column = columns.Prediction ?? (registered.Metric.IsZeroOne() ? "PredictedLabel" : "Score");
        if (scored.Schema.GetColumnOrNull(column) is null)
        {
            throw AccountantException.BadArguments($"the model's output has no column '{column}'; name the prediction column in DataViewColumns.");
        }

        var predicted = Texts(scored, column);
        var predictions = ids.Select((id, i) => new Prediction(id, predicted[i], labels[i])).ToList();
        return book.RecordMany(registered.Name,
        [
            new LookInput { Configuration = configuration, Predictions = predictions, Guard = guard, Adaptive = adaptive, TrainScore = trainScore, Search = search, Stage = stage },
        ])[0];
    }

    private static (List<string> Ids, List<string> Labels) IdsAndLabels(IDataView view, DataViewColumns columns)
    {
        foreach (var name in new[] { columns.Id, columns.Label })
        {
            if (view.Schema.GetColumnOrNull(name) is null)
            {
                throw AccountantException.BadArguments($"the data view has no column '{name}'; name the id and label columns in DataViewColumns.");
            }
        }

        return (Texts(view, columns.Id), Texts(view, columns.Label));
    }

    /// <summary>
    /// A column's values as the ledger's text: bool as 1 and 0, keys as their values' text, numbers in shortest round-trip
    /// form, text as it is.
    /// </summary>
    public static List<string> Texts(IDataView view, string name)
    {
        var column = view.Schema[name];
        var type = column.Type;
        var values = new List<string>();
        using var cursor = view.GetRowCursor([column]);
        if (type is KeyDataViewType)
        {
            VBuffer<ReadOnlyMemory<char>> keys = default;
            column.GetKeyValues(ref keys);
            var names = keys.DenseValues().Select(k => k.ToString()).ToArray();
            var getter = cursor.GetGetter<uint>(column);
            uint key = 0;
            while (cursor.MoveNext())
            {
                getter(ref key);
                values.Add(key >= 1 && key <= names.Length ? names[key - 1] : "");
            }
        }
        else if (type == BooleanDataViewType.Instance)
        {
            var getter = cursor.GetGetter<bool>(column);
            var value = false;
            while (cursor.MoveNext())
            {
                getter(ref value);
                values.Add(value ? "1" : "0");
            }
        }
        else if (type == NumberDataViewType.Single)
        {
            var getter = cursor.GetGetter<float>(column);
            float value = 0;
            while (cursor.MoveNext())
            {
                getter(ref value);
                values.Add(((double)value).ToString("R", CultureInfo.InvariantCulture));
            }
        }
        else if (type == NumberDataViewType.Double)
        {
            var getter = cursor.GetGetter<double>(column);
            double value = 0;
            while (cursor.MoveNext())
            {
                getter(ref value);
                values.Add(value.ToString("R", CultureInfo.InvariantCulture));
            }
        }
        else if (type == NumberDataViewType.Int32)
        {
            var getter = cursor.GetGetter<int>(column);
            var value = 0;
            while (cursor.MoveNext())
            {
                getter(ref value);
                values.Add(value.ToString(CultureInfo.InvariantCulture));
            }
        }
        else if (type is TextDataViewType)
        {
            var getter = cursor.GetGetter<ReadOnlyMemory<char>>(column);
            ReadOnlyMemory<char> value = default;
            while (cursor.MoveNext())
            {
                getter(ref value);
                values.Add(value.ToString());
            }
        }
        else
        {
            throw AccountantException.BadArguments($"the column '{name}' has type {type}, which the ledger cannot read; use text, bool, a key, or a single, double or int number.");
        }

        return values;
    }
}
