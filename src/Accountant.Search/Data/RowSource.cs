using Accountant.Input;

namespace Accountant.Search.Data;

/// <summary>
/// Where a search's rows come from: a CSV file, or rows made in memory (the demo's invented days). Both are read one
/// record at a time through the same strict CSV reader, so a search treats them alike and a file of any size streams.
/// </summary>
public abstract class RowSource
{
    /// <summary>What the rows are called in messages: the file's path, or a description of rows made in memory.</summary>
    public abstract string Name { get; }

    /// <summary>Whether the rows are a file of this machine (a shared search checks the file's bytes; only a file can be rebuilt by unseal).</summary>
    public virtual bool IsFile => false;

    /// <summary>A reader positioned after the header; each call reads the rows from the start again.</summary>
    internal abstract CsvReader Open();

    /// <summary>A CSV file with a header row.</summary>
    public static RowSource File(string path) => new FileSource(path);

    /// <summary>Rows made in memory, each with one field per header column, written as a CSV file would hold them.</summary>
    public static RowSource Memory(string name, IReadOnlyList<string> header, IEnumerable<string[]> rows) => new MemorySource(name, header, rows);

    private sealed class FileSource(string path) : RowSource
    {
        public override string Name => path;

        public override bool IsFile => true;

        internal override CsvReader Open() => CsvReader.Open(path);
    }

    private sealed class MemorySource(string name, IReadOnlyList<string> header, IEnumerable<string[]> rows) : RowSource
    {
        private string? _text;

        public override string Name => name;

        internal override CsvReader Open() => new(new StringReader(_text ??= Text()), name);

        /// <summary>The rows written as a CSV file would hold them, fields with a separator, quote or line break quoted.</summary>
        private string Text()
        {
            var text = new System.Text.StringBuilder();
            void Line(IEnumerable<string> fields) => text.AppendJoin(',', fields.Select(f => f.AsSpan().IndexOfAny(",\"\r\n") >= 0 ? $"\"{f.Replace("\"", "\"\"", StringComparison.Ordinal)}\"" : f)).Append('\n');
            Line(header);
            foreach (var row in rows) Line(row);
            return text.ToString();
        }
    }
}
