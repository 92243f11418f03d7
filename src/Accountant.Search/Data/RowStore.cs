namespace Accountant.Search.Data;

/// <summary>
/// The distinct values of one categorical column met in the rows kept, each given a code in the order first met; cells
/// hold codes, so a value is stored once however many rows hold it. Values are trimmed; missing values have code −1.
/// </summary>
internal sealed class Vocabulary
{
    private readonly Dictionary<string, int> _codes = new(StringComparer.Ordinal);

    public List<string> Values { get; } = [];

    public int Code(ReadOnlySpan<char> cell)
    {
        if (Cells.IsMissing(cell)) return -1;
        var value = cell.Trim();
        if (_codes.GetAlternateLookup<ReadOnlySpan<char>>().TryGetValue(value, out var code)) return code;
        var text = value.ToString();
        _codes[text] = code = Values.Count;
        Values.Add(text);
        return code;
    }
}

/// <summary>
/// Rows kept in memory, column by column and compact: numeric features as float32 (NaN when missing), categorical
/// features as vocabulary codes, the label as a class index (or a number for regression), the line each row starts on,
/// and, when asked, the id column's value. A million rows of ten features take some 50 MB.
/// </summary>
internal sealed class RowStore
{
    private readonly List<float>[] _numbers;
    private readonly List<int>[] _codes;

    public RowStore(int numeric, int categorical, bool keepIds, bool keepFeatures)
    {
        KeepFeatures = keepFeatures;
        _numbers = Enumerable.Range(0, keepFeatures ? numeric : 0).Select(_ => new List<float>()).ToArray();
        _codes = Enumerable.Range(0, keepFeatures ? categorical : 0).Select(_ => new List<int>()).ToArray();
        Ids = keepIds ? [] : null;
    }

    public bool KeepFeatures { get; }

    public int Count => Lines.Count;

    public List<int> Lines { get; } = [];

    /// <summary>The id column's values (trimmed), when kept; otherwise rows are named by their line.</summary>
    public List<string>? Ids { get; }

    /// <summary>Class indices (classification) or label values (regression).</summary>
    public List<int> Classes { get; } = [];

    public List<double> Values { get; } = [];

    public float Number(int column, int row) => _numbers[column][row];

    public int Code(int column, int row) => _codes[column][row];

    public void AddNumber(int column, float value) => _numbers[column].Add(value);

    public void AddCode(int column, int code) => _codes[column].Add(code);

    /// <summary>Row <paramref name="row"/>'s id: the id column's value, or "row-LINE".</summary>
    public string Id(int row) => Ids is { } ids ? ids[row] : "row-" + Lines[row].ToString(System.Globalization.CultureInfo.InvariantCulture);
}
