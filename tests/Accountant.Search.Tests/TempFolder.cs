namespace Accountant.Search.Tests;

/// <summary>A test class's own temporary folder, removed afterwards.</summary>
public abstract class TempFolder : IDisposable
{
    protected TempFolder(string prefix) => Folder = Directory.CreateTempSubdirectory(prefix).FullName;

    protected string Folder { get; }

    public void Dispose()
    {
        try { Directory.Delete(Folder, true); } catch (IOException) { }
        GC.SuppressFinalize(this);
    }
}
