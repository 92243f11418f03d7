using System.Text;

namespace Accountant.Input;

/// <summary>
/// A CSV file read strictly (RFC 4180): a header row of unique names, then rows with exactly as many fields;
/// fields may be quoted, with doubled quotes inside; lines may end in CRLF, LF or a bare CR. The text must be
/// UTF-8 (a byte-order mark is allowed and dropped) or UTF-16 with its byte-order mark. Every problem is reported
/// as a bad-input error that names the file, the line and the fix. Rows are read by <see cref="CsvReader"/>, which also reads
/// files too large to hold, one record at a time.
/// </summary>
public sealed class CsvTable
{
    /// <summary>The longest field accepted, in characters.</summary>
    public const int MaxFieldLength = 1 << 20;

    private readonly Dictionary<string, int> _columns;

    private CsvTable(string source, IReadOnlyList<string> header, List<string[]> rows, List<int> lines)
    {
        Source = source;
        Header = header;
        Rows = rows;
        Lines = lines;
        _columns = new Dictionary<string, int>(header.Count, StringComparer.Ordinal);
        for (var i = 0; i < header.Count; i++) _columns[header[i]] = i;
    }

    public string Source { get; }

    public IReadOnlyList<string> Header { get; }

    /// <summary>The data rows, each with one field per header column.</summary>
    public IReadOnlyList<string[]> Rows { get; }

    /// <summary>The line number (1-based) each data row starts on.</summary>
    public IReadOnlyList<int> Lines { get; }

    public bool Has(string column) => _columns.ContainsKey(column);

    /// <summary>The index of a required column, or an error naming the columns the file has.</summary>
    public int Column(string column, string option) =>
        _columns.TryGetValue(column, out var index) ? index : throw CsvReader.NoColumn(Source, Header, column, option);

    public static CsvTable Load(string path)
    {
        byte[] bytes;
        using (var stream = CsvReader.OpenFile(path))
        {
            try
            {
                bytes = new byte[stream.Length];
                stream.ReadExactly(bytes);
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                throw AccountantException.BadInput($"the file '{path}' cannot be read ({e.Message.TrimEnd('.')}); check its permissions.");
            }
        }

        return Parse(Decode(bytes, path), path);
    }

    /// <summary>Decodes UTF-8 (BOM optional) or UTF-16 with a BOM; refuses anything else.</summary>
    public static string Decode(byte[] bytes, string source)
    {
        if (bytes.Length >= 2 && bytes[0] == 0xFF && bytes[1] == 0xFE) return Strict(new UnicodeEncoding(false, true, true), bytes, 2, source);
        if (bytes.Length >= 2 && bytes[0] == 0xFE && bytes[1] == 0xFF) return Strict(new UnicodeEncoding(true, true, true), bytes, 2, source);
        var offset = bytes.Length >= 3 && bytes[0] == 0xEF && bytes[1] == 0xBB && bytes[2] == 0xBF ? 3 : 0;
        return Strict(new UTF8Encoding(false, true), bytes, offset, source);
    }

    private static string Strict(Encoding encoding, byte[] bytes, int offset, string source)
    {
        try
        {
            var text = encoding.GetString(bytes, offset, bytes.Length - offset);
            if (text.Contains('\0'))
            {
                throw AccountantException.BadInput($"'{source}' contains NUL characters, so it is not a text file in UTF-8; save it as UTF-8 text.");
            }

            return text;
        }
        catch (DecoderFallbackException)
        {
            throw AccountantException.BadInput($"'{source}' is not valid {(encoding is UTF8Encoding ? "UTF-8" : "UTF-16")} text; save it as UTF-8 and try again.");
        }
    }

    public static CsvTable Parse(string text, string source)
    {
        using var reader = new CsvReader(new StringReader(text), source);
        var rows = new List<string[]>();
        var lines = new List<int>();
        while (reader.Read())
        {
            var row = new string[reader.Header.Count];
            for (var i = 0; i < row.Length; i++) row[i] = reader.Text(i);
            rows.Add(row);
            lines.Add(reader.Line);
        }

        if (rows.Count == 0)
        {
            throw AccountantException.BadInput($"'{source}' has a header but no data rows; give at least one row.");
        }

        return new CsvTable(source, reader.Header, rows, lines);
    }

}
