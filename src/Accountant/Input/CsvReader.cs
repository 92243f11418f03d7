using System.Buffers;
using System.Text;

namespace Accountant.Input;

/// <summary>
/// A CSV read one record at a time, strictly (RFC 4180), so a file of any size is checked in one pass with a buffer of
/// bounded size: a header row of unique non-empty names, then rows with exactly as many fields; fields may be quoted,
/// with doubled quotes inside; lines may end in CRLF, LF or a bare CR; lines with nothing on them are skipped. A file must
/// be UTF-8 (a byte-order mark is allowed and dropped) or UTF-16 with its byte-order mark. Every problem is a bad-input
/// error that names the source, the line and the fix; it is raised when the reader reaches it, so a caller that must not
/// act on a bad file reads the whole of it first. <see cref="CsvTable"/> reads whole files through this reader.
/// </summary>
public sealed class CsvReader : IDisposable
{
    // NUL and U+FFFF (what bytes that are not valid text decode to) end a field's plain run like the separators do, and are refused.
    private static readonly SearchValues<char> Unquoted = SearchValues.Create(",\r\n\"\0\uFFFF");
    private static readonly SearchValues<char> Quoted = SearchValues.Create("\"\r\n\0\uFFFF");

    private readonly TextReader _text;
    private readonly Stream? _stream;
    private readonly Dictionary<string, int> _columns;
    private readonly char[] _buffer = new char[1 << 16];
    private int _pos;
    private int _len;
    private bool _eof;

    // The record being read: its fields' characters one after another, and where each field ends.
    private char[] _chars = new char[256];
    private int _used;
    private int[] _ends = new int[16];
    private int _count;
    private int _line = 1;

    /// <summary>Reads CSV text; the header is read (and checked) here. <paramref name="stream"/>, when given, is what
    /// <see cref="Position"/> reports on.</summary>
    public CsvReader(TextReader text, string source, Stream? stream = null)
    {
        _text = text;
        _stream = stream;
        Source = source;
        if (!Next())
        {
            throw AccountantException.BadInput($"'{source}' is empty; give a CSV file with a header row and at least one data row.");
        }

        var header = new string[_count];
        var names = new HashSet<string>(StringComparer.Ordinal);
        for (var i = 0; i < _count; i++)
        {
            header[i] = this[i].Trim().ToString();
            if (header[i].Length == 0)
            {
                throw AccountantException.BadInput($"'{source}' has an empty column name in its header (line {Line}); name every column.");
            }

            if (!names.Add(header[i]))
            {
                throw AccountantException.BadInput($"'{source}' names the column '{Shorten(header[i])}' twice in its header; give each column a unique name.");
            }
        }

        Header = header;
        _columns = new Dictionary<string, int>(header.Length, StringComparer.Ordinal);
        for (var i = 0; i < header.Length; i++) _columns[header[i]] = i;
    }

    /// <summary>Opens a file, decoding UTF-8 (a byte-order mark allowed) or UTF-16 with its byte-order mark, strictly.</summary>
    public static CsvReader Open(string path)
    {
        var stream = OpenFile(path);
        try
        {
            Span<byte> start = stackalloc byte[3];
            var read = stream.ReadAtLeast(start, 3, throwOnEndOfStream: false);
            Encoding encoding;
            int skip;
            // Bytes that are not valid text decode to U+FFFF (a noncharacter), which the parser refuses with the line it is on:
            // a file is decoded ahead of the parser, so a decoder that threw could not say where the bad bytes are.
            var invalid = new DecoderReplacementFallback("\uFFFF");
            if (read >= 2 && start[0] == 0xFF && start[1] == 0xFE) (encoding, skip) = (Encoding.GetEncoding("utf-16LE", EncoderFallback.ExceptionFallback, invalid), 2);
            else if (read >= 2 && start[0] == 0xFE && start[1] == 0xFF) (encoding, skip) = (Encoding.GetEncoding("utf-16BE", EncoderFallback.ExceptionFallback, invalid), 2);
            else (encoding, skip) = (Encoding.GetEncoding("utf-8", EncoderFallback.ExceptionFallback, invalid), read == 3 && start[0] == 0xEF && start[1] == 0xBB && start[2] == 0xBF ? 3 : 0);
            stream.Position = skip;
            return new CsvReader(new StreamReader(stream, encoding, detectEncodingFromByteOrderMarks: false, 1 << 16), path, stream);
        }
        catch
        {
            stream.Dispose();
            throw;
        }
    }

    /// <summary>Opens a file for reading, or a bad-input error that says what is wrong with the path.</summary>
    internal static FileStream OpenFile(string path)
    {
        try
        {
            return new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, 1 << 16, FileOptions.SequentialScan);
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
    }

    public string Source { get; }

    public IReadOnlyList<string> Header { get; }

    /// <summary>The line (1-based) the current record starts on.</summary>
    public int Line { get; private set; }

    /// <summary>Bytes of the underlying file consumed so far (read ahead by the buffers), or 0 when reading text.</summary>
    public long Position => _stream?.Position ?? 0;

    /// <summary>The underlying file's length in bytes, or 0 when reading text.</summary>
    public long Length => _stream?.Length ?? 0;

    /// <summary>Field <paramref name="i"/> of the current record, as written (quotes removed, not trimmed).</summary>
    public ReadOnlySpan<char> this[int i] => _chars.AsSpan(i == 0 ? 0 : _ends[i - 1], _ends[i] - (i == 0 ? 0 : _ends[i - 1]));

    public string Text(int i) => this[i].ToString();

    public bool Has(string column) => _columns.ContainsKey(column);

    /// <summary>The index of a required column, or an error naming the columns the file has.</summary>
    public int Column(string column, string option) =>
        _columns.TryGetValue(column, out var index) ? index : throw NoColumn(Source, Header, column, option);

    internal static AccountantException NoColumn(string source, IReadOnlyList<string> header, string column, string option)
    {
        var have = string.Join(", ", header.Take(8).Select(h => $"'{Shorten(h)}'")) + (header.Count > 8 ? ", ..." : "");
        return AccountantException.BadInput($"'{source}' has no column '{column}' (its header has {have}); name the right column with {option}.");
    }

    /// <summary>Moves to the next data row; false at the end of the file.</summary>
    public bool Read()
    {
        if (!Next()) return false;
        if (_count != Header.Count)
        {
            throw AccountantException.BadInput($"'{Source}' line {Line} has {_count} fields but the header has {Header.Count}; quote fields that contain commas, and give every row all columns.");
        }

        return true;
    }

    public void Dispose() => _text.Dispose();

    private bool Fill()
    {
        if (_eof) return false;
        try
        {
            _len = _text.Read(_buffer, 0, _buffer.Length);
        }
        catch (IOException e)
        {
            throw AccountantException.BadInput($"'{Source}' could not be read to its end ({e.Message.TrimEnd('.')}); check the file.");
        }

        _pos = 0;
        _eof = _len == 0;
        return !_eof;
    }

    private int Peek() => _pos < _len || Fill() ? _buffer[_pos] : -1;

    private void Append(ReadOnlySpan<char> text)
    {
        if (_used + text.Length > _chars.Length) Array.Resize(ref _chars, Math.Max(_chars.Length * 2, _used + text.Length));
        text.CopyTo(_chars.AsSpan(_used));
        _used += text.Length;
        var start = _count == 0 ? 0 : _ends[_count - 1];
        if (_used - start > CsvTable.MaxFieldLength)
        {
            throw AccountantException.BadInput($"'{Source}' line {_line}: a field is longer than {CsvTable.MaxFieldLength} characters; check that the file is really CSV.");
        }
    }

    private void EndField()
    {
        if (_count == _ends.Length) Array.Resize(ref _ends, _ends.Length * 2);
        _ends[_count++] = _used;
    }

    private AccountantException Nul() =>
        AccountantException.BadInput($"'{Source}' line {_line} holds a NUL character or bytes that are not valid {(_text is StreamReader { CurrentEncoding: UnicodeEncoding } ? "UTF-16" : "UTF-8")}; save the file as UTF-8 text.");

    /// <summary>Reads the next record that has something on it into the field buffers; false at the end of the text.</summary>
    private bool Next()
    {
        while (true)
        {
            _used = 0;
            _count = 0;
            Line = _line;
            var quoted = false;
            var started = false;
            var afterQuote = false;
            var ended = false;
            while (!ended)
            {
                if (_pos == _len && !Fill())
                {
                    if (quoted)
                    {
                        throw AccountantException.BadInput($"'{Source}' ends inside a quoted field that starts on line {Line}; close the quote (the file may be truncated).");
                    }

                    if (_used == 0 && _count == 0 && !started) return false;
                    break;
                }

                var rest = _buffer.AsSpan(_pos, _len - _pos);
                if (quoted)
                {
                    var k = rest.IndexOfAny(Quoted);
                    if (k < 0)
                    {
                        Append(rest);
                        _pos = _len;
                        continue;
                    }

                    Append(rest[..k]);
                    _pos += k + 1;
                    var c = rest[k];
                    if (c == '"')
                    {
                        if (Peek() == '"')
                        {
                            Append("\"");
                            _pos++;
                        }
                        else
                        {
                            quoted = false;
                            afterQuote = true;
                        }
                    }
                    else if (c is '\0' or '\uFFFF')
                    {
                        throw Nul();
                    }
                    else
                    {
                        Append(new ReadOnlySpan<char>(in c));
                        if (c == '\n' || Peek() != '\n') _line++;
                    }

                    continue;
                }

                var j = rest.IndexOfAny(Unquoted);
                var plain = j < 0 ? rest : rest[..j];
                if (plain.Length > 0)
                {
                    if (afterQuote)
                    {
                        throw AccountantException.BadInput($"'{Source}' line {_line}: text follows a closing quote; put the separator right after the quoted field.");
                    }

                    Append(plain);
                    started = true;
                }

                if (j < 0)
                {
                    _pos = _len;
                    continue;
                }

                _pos += j + 1;
                switch (rest[j])
                {
                    case ',':
                        EndField();
                        started = afterQuote = false;
                        break;
                    case '\r' or '\n':
                        if (rest[j] == '\r' && Peek() == '\n') _pos++;
                        _line++;
                        ended = true;
                        break;
                    case '"':
                        if (started || afterQuote)
                        {
                            throw AccountantException.BadInput($"'{Source}' line {_line}: a quote appears inside an unquoted field; quote the whole field and double any quotes inside it (\"like \"\"this\"\"\").");
                        }

                        quoted = started = true;
                        break;
                    default:
                        throw Nul();
                }
            }

            EndField();
            // A line with nothing on it is skipped (a trailing newline, or blank lines).
            if (_count == 1 && _used == 0) continue;
            return true;
        }
    }

    internal static string Shorten(string text) => Ledger.Losses.Printable(text.Length <= 40 ? text : text[..37] + "...");
}
