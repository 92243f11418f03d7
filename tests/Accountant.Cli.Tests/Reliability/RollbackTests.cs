using System.Text.Json;

namespace Accountant.Cli.Tests.Reliability;

/// <summary>Replacing the ledger with an older copy of itself: the copy is internally consistent, so only the head a statement printed can tell.</summary>
public sealed class RollbackTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    [Fact]
    public void Replacing_the_ledger_with_an_older_copy_is_detected_against_the_printed_head()
    {
        Assert.Equal(0, _cli.Run("init").Exit);
        Assert.Equal(0, _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(30)).Exit);
        for (var i = 0; i < 3; i++) Assert.Equal(0, _cli.Run("record", "validation", "--configuration", $"{{\"k\":{i}}}", "--score", "0.3").Exit);
        var older = Path.Combine(_cli.Folder, "older.db");
        File.Copy(_cli.Ledger, older); // every connection is closed, so the WAL is checkpointed into the file

        // Two embarrassing looks, then the statement everyone sees, with its chain head.
        for (var i = 3; i < 5; i++) Assert.Equal(0, _cli.Run("record", "validation", "--configuration", $"{{\"k\":{i}}}", "--score", "0.1").Exit);
        var statement = _cli.Run("statement", "validation", "--format", "json");
        Assert.Equal(0, statement.Exit);
        var head = JsonDocument.Parse(statement.Out).RootElement.GetProperty("chainHead").GetString()!;
        Assert.Equal(0, _cli.Run("verify", "--head", head).Exit);

        // Someone puts the older copy back.
        foreach (var suffix in new[] { "-wal", "-shm" }) File.Delete(_cli.Ledger + suffix);
        File.Copy(older, _cli.Ledger, overwrite: true);

        Assert.Equal(0, _cli.Run("verify").Exit); // on its own the older copy is a valid, shorter chain...
        var caught = _cli.Run("verify", "--head", head, "--format", "json");
        Assert.Equal(ExitCodes.LedgerIntegrity, caught.Exit); // ...but it does not hold the printed head
        var report = JsonDocument.Parse(caught.Out).RootElement;
        Assert.False(report.GetProperty("valid").GetBoolean());
        Assert.Equal(4, report.GetProperty("entries").GetInt64()); // the holdout and the first three looks
        Assert.Equal(5, report.GetProperty("firstBadEntry").GetInt64()); // the first entry that is missing
        Assert.Contains("rolled back", report.GetProperty("problem").GetString());
        Assert.Single(caught.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries));
    }
}
