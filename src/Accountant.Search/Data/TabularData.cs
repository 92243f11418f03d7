using System.Globalization;
using Accountant.Input;

namespace Accountant.Search.Data;

/// <summary>What is predicted.</summary>
public enum TaskKind
{
    Binary,
    Multiclass,
    Regression,
}

/// <summary>A feature column as read: numeric (missing values allowed) or categorical.</summary>
public sealed record FeatureColumn(string Name, int Index, bool Numeric);

/// <summary>
/// A CSV file of examples, read strictly, with its label and feature columns. Values "", "NA", "N/A", "NaN", "?" and
/// "null" (any case) are missing. A column is numeric when every present value reads as a finite number (invariant
/// culture); otherwise it is categorical.
/// </summary>
public sealed class TabularData
{
    public static readonly string[] MissingTokens = ["", "na", "n/a", "nan", "?", "null"];

    private TabularData(CsvTable table, int label, int? id, IReadOnlyList<FeatureColumn> features)
    {
        Table = table;
        LabelIndex = label;
        IdIndex = id;
        Features = features;
    }

    public CsvTable Table { get; }

    public int LabelIndex { get; }

    public int? IdIndex { get; }

    public IReadOnlyList<FeatureColumn> Features { get; }

    public int Count => Table.Rows.Count;

    public string LabelName => Table.Header[LabelIndex];

    public static bool IsMissing(string value) => MissingTokens.Contains(value.Trim().ToLowerInvariant());

    public static bool TryNumber(string value, out double number) =>
        double.TryParse(value.Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out number) && double.IsFinite(number);

    /// <summary>Loads rows; <paramref name="featureColumns"/> fixes the feature columns (and their kinds) to those of another source.</summary>
    public static TabularData Load(RowSource source, string label, IReadOnlyCollection<string> ignore, string? idColumn, IReadOnlyList<FeatureColumn>? featureColumns = null)
    {
        var table = source.Load();
        var path = source.Name;
        var labelIndex = table.Column(label, "--label");
        int? idIndex = idColumn is null ? null : table.Column(idColumn, "--id-column");
        foreach (var name in ignore)
        {
            table.Column(name, "--ignore");
        }

        if (table.Rows.Any(row => IsMissing(row[labelIndex])))
        {
            var line = table.Lines[Enumerable.Range(0, table.Rows.Count).First(i => IsMissing(table.Rows[i][labelIndex]))];
            throw AccountantException.BadInput($"'{path}' line {line} has no value in the label column '{label}'; drop unlabelled rows before the search.");
        }

        List<FeatureColumn> features;
        if (featureColumns is not null)
        {
            features = featureColumns.Select(f => f with { Index = table.Column(f.Name, "the same columns as the main data file") }).ToList();
            foreach (var f in features.Where(f => f.Numeric))
            {
                CheckNumeric(table, f.Index, path);
            }
        }
        else
        {
            features = [];
            for (var c = 0; c < table.Header.Count; c++)
            {
                if (c == labelIndex || c == idIndex || ignore.Contains(table.Header[c])) continue;
                var present = table.Rows.Select(row => row[c]).Where(v => !IsMissing(v)).ToList();
                if (present.Count == 0) continue; // an empty column carries nothing
                features.Add(new FeatureColumn(table.Header[c], c, present.All(v => TryNumber(v, out _))));
            }
        }

        if (features.Count == 0)
        {
            throw AccountantException.BadInput($"'{path}' has no feature columns besides the label '{label}'; give a file with at least one feature.");
        }

        return new TabularData(table, labelIndex, idIndex, features);
    }

    private static void CheckNumeric(CsvTable table, int column, string path)
    {
        for (var r = 0; r < table.Rows.Count; r++)
        {
            var value = table.Rows[r][column];
            if (!IsMissing(value) && !TryNumber(value, out _))
            {
                throw AccountantException.BadInput($"'{path}' line {table.Lines[r]}: '{value}' in the numeric column '{table.Header[column]}' is not a number; write numbers with a '.' decimal point, or leave the cell empty for a missing value.");
            }
        }
    }

    /// <summary>The id of row r: the id column's value, or "row-LINE" (the file's line number).</summary>
    public string Id(int r) => IdIndex is { } i ? Table.Rows[r][i].Trim() : "row-" + Table.Lines[r].ToString(CultureInfo.InvariantCulture);

    public string Label(int r) => Ledger.Fingerprint.CanonicalLabel(Table.Rows[r][LabelIndex]);

    /// <summary>
    /// The task a label column implies: two distinct values → binary; numbers with more than 20 distinct values or any
    /// fraction → regression; otherwise multiclass. Refuses a constant label.
    /// </summary>
    public TaskKind InferTask()
    {
        var distinct = Enumerable.Range(0, Count).Select(Label).Distinct().ToList();
        if (distinct.Count < 2)
        {
            throw AccountantException.BadInput($"the label column '{LabelName}' has a single value ('{distinct.FirstOrDefault()}'); there is nothing to predict.");
        }

        if (distinct.Count == 2) return TaskKind.Binary;
        var numbers = distinct.Select(v => TryNumber(v, out var x) ? x : (double?)null).ToList();
        if (numbers.All(x => x is not null) && (distinct.Count > 20 || numbers.Any(x => x!.Value != Math.Floor(x.Value))))
        {
            return TaskKind.Regression;
        }

        return TaskKind.Multiclass;
    }
}
