using System.Text;

namespace Accountant.Input;

/// <summary>
/// A CSV file read strictly (RFC 4180): a header row of unique names, then rows with exactly as many fields;
/// fields may be quoted, with doubled quotes inside; lines may end in CRLF, LF or a bare CR. The text must be
/// UTF-8 (a byte-order mark is allowed and dropped) or UTF-16 with its byte-order mark. Every problem is reported
/// as a bad-input error that names the file, the line and the fix.
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
    public int Column(string column, string option)
    {
        if (_columns.TryGetValue(column, out var index))
        {
            return index;
        }

        var have = string.Join(", ", Header.Take(8).Select(h => $"'{Shorten(h)}'")) + (Header.Count > 8 ? ", ..." : "");
        throw AccountantException.BadInput($"'{Source}' has no column '{column}' (its header has {have}); name the right column with {option}.");
    }

    public static CsvTable Load(string path)
    {
        byte[] bytes;
        try
        {
            bytes = File.ReadAllBytes(path);
        }
        catch (FileNotFoundException)
        {
            throw AccountantException.BadInput($"the file '{path}' does not exist; check the path.");
        }
        catch (DirectoryNotFoundException)
        {
            throw AccountantException.BadInput($"the folder of '{path}' does not exist; check the path.");
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw AccountantException.BadInput($"the file '{path}' cannot be read ({e.Message.TrimEnd('.')}); check its permissions.");
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
        // Fields and starting line of each record, kept apart (not as tuples) so that no generic code over a value type
        // is compiled at run time: ReadyToRun code covers these, and a one-off command pays no JIT for them.
        var records = new List<List<string>>();
        var recordLines = new List<int>();
        var fields = new List<string>();
        var field = new StringBuilder();
        var line = 1;
        var recordLine = 1;
        var i = 0;
        var quoted = false;
        var fieldStarted = false;
        var afterQuote = false;

        void EndField()
        {
            fields.Add(field.ToString());
            field.Clear();
            fieldStarted = false;
            afterQuote = false;
        }

        void EndRecord()
        {
            EndField();
            // A line with nothing on it is skipped (a trailing newline, or blank lines).
            if (!(fields.Count == 1 && fields[0].Length == 0))
            {
                records.Add(fields);
                recordLines.Add(recordLine);
            }

            fields = new List<string>();
        }

        while (i < text.Length)
        {
            var c = text[i];
            if (quoted)
            {
                if (c == '"')
                {
                    if (i + 1 < text.Length && text[i + 1] == '"')
                    {
                        field.Append('"');
                        i += 2;
                        continue;
                    }

                    quoted = false;
                    afterQuote = true;
                    i++;
                    continue;
                }

                if (c == '\n' || (c == '\r' && (i + 1 >= text.Length || text[i + 1] != '\n'))) line++;
                field.Append(c);
                i++;
            }
            else if (c == ',')
            {
                EndField();
                i++;
            }
            else if (c == '\r' || c == '\n')
            {
                EndRecord();
                i += c == '\r' && i + 1 < text.Length && text[i + 1] == '\n' ? 2 : 1;
                line++;
                recordLine = line;
            }
            else if (c == '"')
            {
                if (fieldStarted || afterQuote)
                {
                    throw AccountantException.BadInput($"'{source}' line {line}: a quote appears inside an unquoted field; quote the whole field and double any quotes inside it (\"like \"\"this\"\"\").");
                }

                quoted = true;
                fieldStarted = true;
                i++;
            }
            else
            {
                if (afterQuote)
                {
                    throw AccountantException.BadInput($"'{source}' line {line}: text follows a closing quote; put the separator right after the quoted field.");
                }

                field.Append(c);
                fieldStarted = true;
                i++;
            }

            if (field.Length > MaxFieldLength)
            {
                throw AccountantException.BadInput($"'{source}' line {line}: a field is longer than {MaxFieldLength} characters; check that the file is really CSV.");
            }
        }

        if (quoted)
        {
            throw AccountantException.BadInput($"'{source}' ends inside a quoted field that starts on line {recordLine}; close the quote (the file may be truncated).");
        }

        if (field.Length > 0 || fields.Count > 0 || fieldStarted)
        {
            EndRecord();
        }

        return FromRecords(source, records, recordLines);
    }

    /// <summary>
    /// A table of rows already split into fields (rows made in memory rather than read from a file), checked as a file
    /// is: unique non-empty column names, every row with one field per column. Rows are numbered as the lines of a file
    /// would be: the header is line 1.
    /// </summary>
    public static CsvTable FromRows(string source, IReadOnlyList<string> header, IEnumerable<string[]> rows)
    {
        var records = new List<List<string>> { header.ToList() };
        var lines = new List<int> { 1 };
        foreach (var row in rows)
        {
            records.Add([.. row]);
            lines.Add(lines.Count + 1);
        }

        return FromRecords(source, records, lines);
    }

    private static CsvTable FromRecords(string source, List<List<string>> records, List<int> recordLines)
    {
        if (records.Count == 0)
        {
            throw AccountantException.BadInput($"'{source}' is empty; give a CSV file with a header row and at least one data row.");
        }

        var header = records[0].Select(h => h.Trim()).ToList();
        var names = new HashSet<string>(StringComparer.Ordinal);
        foreach (var name in header)
        {
            if (name.Length == 0)
            {
                throw AccountantException.BadInput($"'{source}' has an empty column name in its header (line {recordLines[0]}); name every column.");
            }

            if (!names.Add(name))
            {
                throw AccountantException.BadInput($"'{source}' names the column '{Shorten(name)}' twice in its header; give each column a unique name.");
            }
        }

        var rows = new List<string[]>(records.Count - 1);
        var lines = new List<int>(records.Count - 1);
        for (var r = 1; r < records.Count; r++)
        {
            var (rowFields, rowLine) = (records[r], recordLines[r]);
            if (rowFields.Count != header.Count)
            {
                throw AccountantException.BadInput($"'{source}' line {rowLine} has {rowFields.Count} fields but the header has {header.Count}; quote fields that contain commas, and give every row all columns.");
            }

            rows.Add([.. rowFields]);
            lines.Add(rowLine);
        }

        if (rows.Count == 0)
        {
            throw AccountantException.BadInput($"'{source}' has a header but no data rows; give at least one row.");
        }

        return new CsvTable(source, header, rows, lines);
    }

    private static string Shorten(string text) => Ledger.Losses.Printable(text.Length <= 40 ? text : text[..37] + "...");
}
