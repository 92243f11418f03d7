using Accountant.Input;
using Accountant.Ledger;

namespace Accountant.Search.Data;

/// <summary>
/// The first pass over a source: every row read and checked (structure, labels, numeric columns) before anything is
/// written, the feature columns and their kinds, and the labels counted by class, in memory bounded by the number of
/// distinct labels (at most <see cref="MaxClasses"/> are told apart), whatever the number of rows.
/// </summary>
internal sealed class Survey
{
    /// <summary>The most distinct labels kept apart; beyond it the labels are taken as continuous (or too many classes).</summary>
    public const int MaxClasses = 65_536;

    /// <summary>Rows between two progress reports.</summary>
    public const int ReportEvery = 1 << 16;

    public required RowSource Source { get; init; }

    public required IReadOnlyList<string> Header { get; init; }

    public required int LabelIndex { get; init; }

    public int? IdIndex { get; init; }

    public required IReadOnlyList<FeatureColumn> Features { get; set; }

    public long Rows { get; private set; }

    /// <summary>The canonical labels in the order first met, with their counts (while there are at most <see cref="MaxClasses"/>).</summary>
    public List<(string Label, long Count)> Labels { get; } = [];

    /// <summary>More than <see cref="MaxClasses"/> distinct labels were met: they were not all counted.</summary>
    public bool ManyLabels { get; private set; }

    /// <summary>Whether every label reads as a finite number, and whether any of those has a fraction.</summary>
    public bool NumericLabels { get; private set; } = true;

    public bool FractionalLabels { get; private set; }

    /// <summary>The first label that is not a number, and its line (for the regression check).</summary>
    public (int Line, string Label)? FirstText { get; private set; }

    public string LabelName => Header[LabelIndex];

    /// <summary>
    /// Reads every row of <paramref name="source"/>. Without <paramref name="fixedColumns"/>, the feature columns are every
    /// column but the label, the id and the ignored ones that has a present value, numeric when all its present values are
    /// numbers; with them (a validation or test file), those columns, and a numeric one that holds text is an error.
    /// </summary>
    public static Survey Of(RowSource source, string label, IReadOnlyCollection<string> ignore, string? idColumn,
        IReadOnlyList<FeatureColumn>? fixedColumns, Action<double>? read = null)
    {
        using var reader = source.Open();
        var labelIndex = reader.Column(label, "--label");
        int? idIndex = idColumn is null ? null : reader.Column(idColumn, "--id-column");
        foreach (var name in ignore) reader.Column(name, "--ignore");
        List<FeatureColumn> candidates = fixedColumns is not null
            ? fixedColumns.Select(f => f with { Index = reader.Column(f.Name, "the same columns as the main data file") }).ToList()
            : Enumerable.Range(0, reader.Header.Count).Where(c => c != labelIndex && c != idIndex && !ignore.Contains(reader.Header[c]))
                .Select(c => new FeatureColumn(reader.Header[c], c, true)).ToList();
        var numeric = candidates.Select(c => c.Numeric).ToArray();
        var present = new bool[candidates.Count];
        var survey = new Survey { Source = source, Header = reader.Header, LabelIndex = labelIndex, IdIndex = idIndex, Features = candidates };
        var classes = new Dictionary<string, int>(StringComparer.Ordinal);
        var byText = classes.GetAlternateLookup<ReadOnlySpan<char>>();
        var canonical = new Dictionary<string, int>(StringComparer.Ordinal);
        var counts = new List<long>();
        while (reader.Read())
        {
            survey.Rows++;
            if (read is not null && survey.Rows % ReportEvery == 0 && reader.Length > 0) read((double)reader.Position / reader.Length);
            var text = reader[labelIndex].Trim();
            if (Cells.IsMissing(text))
            {
                throw AccountantException.BadInput($"'{source.Name}' line {reader.Line} has no value in the label column '{label}'; drop unlabelled rows before the search.");
            }

            if (survey.NumericLabels)
            {
                if (!Cells.TryNumber(text, out var value))
                {
                    survey.NumericLabels = false;
                    survey.FirstText = (reader.Line, Fingerprint.CanonicalLabel(text.ToString()));
                }
                else if (value != Math.Floor(value))
                {
                    survey.FractionalLabels = true;
                }
            }

            if (!survey.ManyLabels)
            {
                if (byText.TryGetValue(text, out var k))
                {
                    counts[k]++;
                }
                else if (classes.Count == MaxClasses)
                {
                    survey.ManyLabels = true;
                }
                else
                {
                    // Labels that read alike once canonical ("1" and "1.0") are one class.
                    var name = Fingerprint.CanonicalLabel(text.ToString());
                    if (!canonical.TryGetValue(name, out k))
                    {
                        canonical[name] = k = counts.Count;
                        counts.Add(0);
                        survey.Labels.Add((name, 0));
                    }

                    classes[text.ToString()] = k;
                    counts[k]++;
                }
            }

            for (var c = 0; c < candidates.Count; c++)
            {
                var cell = reader[candidates[c].Index];
                if (Cells.IsMissing(cell)) continue;
                present[c] = true;
                if (!numeric[c] || Cells.TryNumber(cell, out _)) continue;
                if (fixedColumns is not null)
                {
                    throw AccountantException.BadInput($"'{source.Name}' line {reader.Line}: '{Cells.Shown(cell)}' in the numeric column '{candidates[c].Name}' is not a number; write numbers with a '.' decimal point, or leave the cell empty for a missing value.");
                }

                numeric[c] = false;
            }
        }

        if (survey.Rows == 0)
        {
            throw AccountantException.BadInput($"'{source.Name}' has a header but no data rows; give at least one row.");
        }

        for (var k = 0; k < survey.Labels.Count; k++) survey.Labels[k] = (survey.Labels[k].Label, counts[k]);
        if (fixedColumns is null)
        {
            // An empty column carries nothing.
            survey.Features = Enumerable.Range(0, candidates.Count).Where(c => present[c]).Select(c => candidates[c] with { Numeric = numeric[c] }).ToList();
            if (survey.Features.Count == 0)
            {
                throw AccountantException.BadInput($"'{source.Name}' has no feature columns besides the label '{label}'; give a file with at least one feature.");
            }
        }

        if (survey.Rows >= ReportEvery && reader.Length > 0) read?.Invoke(1.0); // large files only: small ones are read in a blink
        return survey;
    }


    /// <summary>
    /// The task the labels imply: two distinct values → binary; numbers with more than 20 distinct values or any fraction →
    /// regression; otherwise multiclass. Refuses a constant label.
    /// </summary>
    public TaskKind InferTask()
    {
        if (!ManyLabels && Labels.Count < 2)
        {
            throw AccountantException.BadInput($"the label column '{LabelName}' has a single value ('{Labels.FirstOrDefault().Label}'); there is nothing to predict.");
        }

        if (!ManyLabels && Labels.Count == 2) return TaskKind.Binary;
        return NumericLabels && (ManyLabels || Labels.Count > 20 || FractionalLabels) ? TaskKind.Regression : TaskKind.Multiclass;
    }
}
