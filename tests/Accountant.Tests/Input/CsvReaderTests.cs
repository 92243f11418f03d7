using System.Text;
using Accountant.Input;

namespace Accountant.Tests.Input;

/// <summary>
/// The record-at-a-time CSV reader against RFC 4180 (a header row, fields separated by commas, a field quoted when it holds
/// a comma, a quote or a line break, quotes inside doubled, records ending in CRLF; LF and a bare CR accepted too): files
/// written by the rules in the test, long enough that fields, doubled quotes and CRLF pairs fall across the reader's
/// 64K-character buffer, read back field for field and line for line.
/// </summary>
public sealed class CsvReaderTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("accountant-csv-").FullName;

    public void Dispose()
    {
        try { Directory.Delete(_folder, true); } catch (IOException) { }
    }

    /// <summary>A field by RFC 4180: quoted when it holds a separator, a quote or a line break, quotes doubled.</summary>
    private static string Field(string value) =>
        value.AsSpan().IndexOfAny(",\"\r\n") >= 0 ? "\"" + value.Replace("\"", "\"\"", StringComparison.Ordinal) + "\"" : value;

    /// <summary>Lines a field's text takes (a line break inside a quoted field counts as the file's lines do).</summary>
    private static int Breaks(string value) => value.Replace("\r\n", "\n", StringComparison.Ordinal).Count(c => c is '\n' or '\r');

    [Theory]
    [InlineData("\n")]
    [InlineData("\r\n")]
    [InlineData("\r")]
    public void A_long_file_reads_back_field_for_field_with_the_line_each_record_starts_on(string eol)
    {
        var random = new Random(eol.Length);
        string Value()
        {
            var kind = random.Next(10);
            var length = kind == 0 ? random.Next(20_000, 90_000) : random.Next(0, 12); // some fields longer than a buffer
            var chars = new char[length];
            for (var i = 0; i < length; i++)
            {
                var pick = random.Next(40);
                chars[i] = pick switch { 0 => '"', 1 => ',', 2 => '\n', 3 => '\r', 4 => 'é', 5 => ' ', _ => (char)('a' + pick % 26) };
            }

            return new string(chars);
        }

        var header = new[] { "id", "text", "note" };
        var rows = new List<string[]>();
        var lines = new List<int>();
        var text = new StringBuilder(string.Join(',', header) + eol);
        var line = 2;
        for (var r = 0; r < 400; r++)
        {
            var row = new[] { $"r{r}", Value(), Value() };
            if (row.All(v => v.Length == 0)) row[0] = "x"; // a record with nothing on it is a blank line, which is skipped
            rows.Add(row);
            lines.Add(line);
            text.Append(string.Join(',', row.Select(Field))).Append(eol);
            line += 1 + row.Sum(Breaks);
            if (r % 50 == 0)
            {
                text.Append(eol); // blank lines between records are skipped, and counted
                line++;
            }
        }

        var path = Path.Combine(_folder, "long.csv");
        File.WriteAllText(path, text.ToString(), new UTF8Encoding(true)); // with a byte-order mark, which is dropped
        Assert.True(text.Length > 1_000_000);
        using var reader = CsvReader.Open(path);
        Assert.Equal(header, reader.Header);
        var read = 0;
        while (reader.Read())
        {
            Assert.Equal(rows[read], Enumerable.Range(0, 3).Select(reader.Text));
            Assert.Equal(lines[read], reader.Line);
            read++;
        }

        Assert.Equal(rows.Count, read);
        // The whole-file table reads the same.
        var table = CsvTable.Load(path);
        Assert.Equal(rows, table.Rows);
        Assert.Equal(lines, table.Lines);
    }

    [Fact]
    public void UTF16_with_its_mark_reads_as_UTF8_does_and_bad_bytes_deep_inside_name_their_line()
    {
        var text = "a,b\n" + string.Concat(Enumerable.Range(0, 30_000).Select(i => $"{i},café\n"));
        var utf16 = Path.Combine(_folder, "utf16.csv");
        File.WriteAllText(utf16, text, new UnicodeEncoding(false, true));
        using (var reader = CsvReader.Open(utf16))
        {
            var count = 0;
            while (reader.Read()) count++;
            Assert.Equal(30_000, count);
        }

        // A lone 0xE9 (Latin-1 é) inside line 25,001, long after the reader's first buffers were decoded.
        var bytes = Encoding.UTF8.GetBytes(text);
        var at = Encoding.UTF8.GetByteCount(string.Concat(text.Split('\n').Take(25_000).Select(l => l + "\n"))) + 2;
        var latin = Path.Combine(_folder, "latin.csv");
        File.WriteAllBytes(latin, [.. bytes[..at], 0xE9, .. bytes[at..]]);
        using var bad = CsvReader.Open(latin);
        var error = Assert.Throws<AccountantException>(() => { while (bad.Read()) { } });
        Assert.Contains("line 25001 holds a NUL character or bytes that are not valid UTF-8", error.Message);
    }
}
