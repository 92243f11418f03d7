using Accountant.Ledger;

namespace Accountant.Tests.Support;

/// <summary>A ledger file in a fresh temporary folder, deleted afterwards.</summary>
public sealed class TempLedger : IDisposable
{
    public TempLedger()
    {
        Folder = System.IO.Path.Combine(System.IO.Path.GetTempPath(), "accountant-tests-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Folder);
        Path = System.IO.Path.Combine(Folder, "ledger.db");
    }

    public string Folder { get; }

    public string Path { get; }

    public Bookkeeper Create() => Bookkeeper.Create(Path, new FixedClock());

    public Bookkeeper Open() => Bookkeeper.Open(Path, new FixedClock());

    /// <summary>Examples "e001".."eNNN" with labels cycling through the given classes.</summary>
    public static List<HoldoutExample> Examples(int n, params string[] classes)
    {
        classes = classes.Length == 0 ? ["0", "1"] : classes;
        return Enumerable.Range(1, n).Select(i => new HoldoutExample($"e{i:000}", classes[i % classes.Length])).ToList();
    }

    /// <summary>Predictions equal to the labels except for the first <paramref name="wrong"/> examples.</summary>
    public static List<Prediction> Predictions(IReadOnlyList<HoldoutExample> examples, int wrong) =>
        examples.Select((e, i) => new Prediction(e.Id, i < wrong ? (e.Label == "0" ? "1" : "0") : e.Label)).ToList();

    public void Dispose()
    {
        try { Directory.Delete(Folder, recursive: true); } catch (IOException) { } catch (UnauthorizedAccessException) { }
    }
}

/// <summary>A clock that starts at a fixed instant and ticks one second per reading.</summary>
public sealed class FixedClock : TimeProvider
{
    private DateTimeOffset _now = new(2026, 1, 2, 3, 4, 5, TimeSpan.Zero);

    public override DateTimeOffset GetUtcNow()
    {
        var now = _now;
        _now = _now.AddSeconds(1);
        return now;
    }
}
