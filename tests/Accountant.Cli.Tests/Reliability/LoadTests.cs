using System.Collections.Concurrent;
using System.Diagnostics;
using System.Globalization;
using System.Text.Json;
using Xunit.Abstractions;

namespace Accountant.Cli.Tests.Reliability;

/// <summary>
/// Many writer processes on one ledger: half run the CLI's <c>record</c> once per look (a new process each time), half are
/// long-lived library writers recording one look per transaction. Every acknowledged look must be in the ledger exactly
/// once, under the number it was told, numbers gapless, the chain valid, and no writer may fail on a lock.
/// </summary>
public sealed class LoadTests(ITestOutputHelper output)
{
    private const int CliWriters = 4, CliLooksEach = 40;
    private const int LibraryWriters = 4, LibraryLooksEach = 150;

    [Fact]
    public async Task Eight_writer_processes_lose_no_look_duplicate_none_and_keep_the_chain_valid()
    {
        using var cli = new CliHarness();
        Assert.Equal(0, cli.Run("init").Exit);
        Assert.Equal(0, cli.Run("holdout", "add", "validation", "--labels", cli.Labels(40)).Exit);
        var clock = Stopwatch.StartNew();

        var acknowledged = new ConcurrentBag<(int Number, int Writer, int I)>();
        var failures = new ConcurrentBag<string>();
        var libraries = Enumerable.Range(0, LibraryWriters).Select(w => Task.Run(() =>
        {
            var writer = 100 + w;
            var result = Processes.Run(Processes.LoadWriter, cli.Ledger, "validation", writer.ToString(CultureInfo.InvariantCulture), LibraryLooksEach.ToString(CultureInfo.InvariantCulture));
            if (result.Exit != 0 || result.Err.Length > 0) failures.Add($"library writer {writer}: exit {result.Exit}: {result.Err}");
            foreach (var line in result.Out.Split('\n', StringSplitOptions.RemoveEmptyEntries))
            {
                var parts = line.Split(' ', 3);
                var (wr, i) = Parse(parts[2]);
                acknowledged.Add((int.Parse(parts[1], CultureInfo.InvariantCulture), wr, i));
            }
        })).ToList();
        var records = Enumerable.Range(0, CliWriters).Select(w => Task.Run(() =>
        {
            for (var i = 0; i < CliLooksEach; i++)
            {
                var result = Processes.Run(Processes.Cli, "record", "validation", "--configuration", $"{{\"writer\":{w},\"i\":{i}}}", "--score", "0.25", "--format", "json", "--ledger", cli.Ledger);
                if (result.Exit != 0 || result.Err.Length > 0)
                {
                    failures.Add($"record writer {w} look {i}: exit {result.Exit}: {result.Err}");
                    continue;
                }

                using var json = JsonDocument.Parse(result.Out);
                acknowledged.Add((json.RootElement.GetProperty("look").GetInt32(), w, i));
            }
        })).ToList();
        await Task.WhenAll([.. libraries, .. records]);
        clock.Stop();

        Assert.Empty(failures); // no writer saw "database is locked" or any other error
        const int total = CliWriters * CliLooksEach + LibraryWriters * LibraryLooksEach;
        Assert.Equal(total, acknowledged.Count);

        using var book = Bookkeeper.Open(cli.Ledger);
        var looks = book.Store.Looks(book.Holdout("validation"));
        Assert.Equal(Enumerable.Range(1, total), looks.Select(l => l.Number)); // unique and gapless
        var stored = looks.ToDictionary(l => l.Number, l => Parse(l.Configuration));
        Assert.All(acknowledged, a => Assert.Equal((a.Writer, a.I), stored[a.Number])); // each acknowledged look, under its number
        Assert.Equal(total, stored.Values.Distinct().Count()); // and none twice
        var report = book.Verify();
        Assert.True(report.Valid, report.Problem);
        output.WriteLine($"{CliWriters + LibraryWriters} writer processes ({CliWriters} running 'record' {CliLooksEach} times each, {LibraryWriters} library writers of {LibraryLooksEach} looks): {total} looks in {clock.Elapsed.TotalSeconds:0.0} s, all present once, chain valid.");
    }

    private static (int Writer, int I) Parse(string configuration)
    {
        using var json = JsonDocument.Parse(configuration);
        return (json.RootElement.GetProperty("writer").GetInt32(), json.RootElement.GetProperty("i").GetInt32());
    }
}
