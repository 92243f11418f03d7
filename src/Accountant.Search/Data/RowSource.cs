using Accountant.Input;

namespace Accountant.Search.Data;

/// <summary>
/// Where a search's rows come from: a CSV file, or rows made in memory (the demo's invented days). Every source is read
/// through the same strict checks, so a search treats both alike.
/// </summary>
public abstract class RowSource
{
    /// <summary>What the rows are called in messages: the file's path, or a description of rows made in memory.</summary>
    public abstract string Name { get; }

    /// <summary>Whether the rows are a file of this machine (a shared search checks the file's bytes; only a file can be rebuilt by unseal).</summary>
    public virtual bool IsFile => false;

    internal abstract CsvTable Load();

    /// <summary>A CSV file with a header row.</summary>
    public static RowSource File(string path) => new FileSource(path);

    /// <summary>Rows made in memory, each with one field per header column, written as a CSV file would hold them.</summary>
    public static RowSource Memory(string name, IReadOnlyList<string> header, IEnumerable<string[]> rows) => new MemorySource(name, header, rows);

    private sealed class FileSource(string path) : RowSource
    {
        public override string Name => path;

        public override bool IsFile => true;

        internal override CsvTable Load() => CsvTable.Load(path);
    }

    private sealed class MemorySource(string name, IReadOnlyList<string> header, IEnumerable<string[]> rows) : RowSource
    {
        public override string Name => name;

        internal override CsvTable Load() => CsvTable.FromRows(name, header, rows);
    }
}
