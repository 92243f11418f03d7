using System.Diagnostics;
using System.Globalization;
using System.Text;
using Xunit.Abstractions;

namespace Accountant.Cli.Tests.Reliability;

/// <summary>
/// Writers killed with SIGKILL at random moments. After every kill the ledger must open, its chain must verify, and it
/// must hold exactly what was committed: an import is all or nothing, a search keeps every look it finished.
/// </summary>
public sealed class CrashTests(ITestOutputHelper output)
{
    private const int ImportKills = 100, ImportSize = 400;
    private const int SearchKills = 8;
    private const double Start = 0.3, End = 1.1;

    /// <summary>On SQLite, and on PostgreSQL, where the server's own transaction holds the import (fewer kills: each costs a new server backend).</summary>
    [Theory]
    [InlineData(false, ImportKills)]
    [InlineData(true, 20)]
    public void An_import_killed_at_random_moments_is_all_or_nothing_and_the_ledger_always_verifies(bool postgres, int kills)
    {
        using var cli = new CliHarness();
        string? schema = null;
        // The imports on PostgreSQL carry an application name of their own, so the test can tell when the server has
        // finished with a killed one (see WaitForServer).
        var ledger = postgres
            ? new Npgsql.NpgsqlConnectionStringBuilder(Accountant.Tests.Support.PostgresServer.NewSchema(out schema)) { ApplicationName = "crash-" + Guid.NewGuid().ToString("N")[..12] }.ConnectionString
            : cli.Ledger;
        try
        {
            Kill(cli, ledger, kills, postgres);
        }
        finally
        {
            if (schema is not null) Accountant.Tests.Support.PostgresServer.DropSchema(schema);
        }
    }

    /// <summary>
    /// A killed client's transaction is the server's to finish: a COMMIT the client sent just before it died still
    /// completes (or the server rolls the transaction back when it notices the closed connection). Either way the outcome
    /// is all or nothing, but it is settled only once the server has ended that client's session, so the test waits for
    /// that before it counts.
    /// </summary>
    private static void WaitForServer(string ledger)
    {
        var application = new Npgsql.NpgsqlConnectionStringBuilder(ledger).ApplicationName!;
        var deadline = DateTime.UtcNow + TimeSpan.FromSeconds(60);
        using var connection = new Npgsql.NpgsqlConnection(Accountant.Tests.Support.PostgresServer.ConnectionString);
        connection.Open();
        using var command = new Npgsql.NpgsqlCommand("SELECT count(*) FROM pg_stat_activity WHERE application_name = @name;", connection);
        command.Parameters.AddWithValue("name", application);
        while ((long)command.ExecuteScalar()! > 0)
        {
            Assert.True(DateTime.UtcNow < deadline, "the server did not end a killed import's session within 60 s");
            Thread.Sleep(20);
        }
    }

    private void Kill(CliHarness cli, string ledger, int kills, bool postgres)
    {
        Assert.Equal(0, cli.Run("init", "--ledger", ledger).Exit);
        Assert.Equal(0, cli.Run("holdout", "add", "validation", "--labels", cli.Labels(40), "--ledger", ledger).Exit);
        var lines = new StringBuilder();
        for (var i = 0; i < ImportSize; i++) lines.Append(CultureInfo.InvariantCulture, $"{{\"configuration\":{{\"trainer\":\"tree\",\"k\":{i}}},\"score\":{i % 40 / 40.0}}}\n");
        var file = cli.Write("looks.jsonl", lines.ToString());

        // Two uninterrupted imports (the first warms the disk cache) tell how long an import takes here; kills are spread
        // over 30–110% of the second one's time (the first third is mostly the runtime starting), so most land while the
        // file is read and the looks written, and some after the commit.
        Assert.Equal(0, Processes.Run(Processes.Cli, "import", "validation", file, "--ledger", ledger).Exit);
        var timer = Stopwatch.StartNew();
        Assert.Equal(0, Processes.Run(Processes.Cli, "import", "validation", file, "--ledger", ledger).Exit);
        var duration = timer.Elapsed.TotalMilliseconds;
        var expected = 2 * ImportSize;
        var random = new Random(20261201);
        int killedBefore = 0, committed = 0, journalLeft = 0;
        for (var kill = 0; kill < kills; kill++)
        {
            // Stratified: the k-th kill falls at a random moment within the k-th slice of the window.
            var delay = (Start + (kill + random.NextDouble()) / kills * (End - Start)) * duration;
            using (var running = new Processes.Running(Processes.Cli, ["import", "validation", file, "--ledger", ledger]))
            {
                Thread.Sleep(TimeSpan.FromMilliseconds(delay));
                running.Kill();
                var reported = running.Out.Contains("imported", StringComparison.Ordinal);
                // A write-ahead log left with frames in it means the kill came after the import began writing pages.
                var wal = new FileInfo(cli.Ledger + "-wal");
                if (!postgres && wal.Exists && wal.Length > 0) journalLeft++;
                if (postgres) WaitForServer(ledger);
                using var book = Bookkeeper.Open(ledger);
                var report = book.Verify();
                Assert.True(report.Valid, $"after kill {kill} at {delay:0} ms: {report.Problem}");
                var looks = book.Store.Looks(book.Holdout("validation"));
                Assert.Equal(Enumerable.Range(1, looks.Count), looks.Select(l => l.Number));
                if (looks.Count == expected + ImportSize)
                {
                    expected += ImportSize;
                    committed++;
                }
                else
                {
                    Assert.False(reported, $"kill {kill}: the import said it committed but the ledger does not hold its looks");
                    killedBefore++;
                }

                Assert.Equal(expected, looks.Count); // all or nothing: never a part of an import
            }
        }

        output.WriteLine($"{(postgres ? "PostgreSQL" : "SQLite")}: {kills} SIGKILLs of 'import' ({ImportSize} looks, uninterrupted {duration:0} ms, kills spread over {Start * duration:0}–{End * duration:0} ms): {committed} had committed, {killedBefore} left nothing{(postgres ? "" : $", {journalLeft} left a write-ahead log with frames to recover")}; the ledger verified every time and held {expected} looks.");
    }

    [Fact]
    public void A_search_killed_at_random_moments_keeps_every_finished_look_and_verifies()
    {
        using var cli = new CliHarness();
        var data = Path.Combine(cli.Folder, "bakery.csv");
        Assert.Equal(0, cli.Run("demo", "--export", data, "--export-rows", "200", "--no-ledger").Exit);
        string[] Search(string ledger) => ["search", data, "--label", "sold_out", "--id-column", "day", "--looks", "6", "--quiet", "--ledger", ledger];

        var timer = Stopwatch.StartNew();
        var whole = Processes.Run(Processes.Cli, Search(Path.Combine(cli.Folder, "whole.db")));
        Assert.Equal(0, whole.Exit);
        var duration = timer.Elapsed.TotalMilliseconds;
        var random = new Random(7);
        var found = new List<string>();
        for (var kill = 0; kill < SearchKills; kill++)
        {
            var ledger = Path.Combine(cli.Folder, $"search-{kill}.db");
            var delay = (kill + random.NextDouble()) / SearchKills * duration;
            using (var running = new Processes.Running(Processes.Cli, Search(ledger)))
            {
                Thread.Sleep(TimeSpan.FromMilliseconds(delay));
                running.Kill();
            }

            if (!File.Exists(ledger))
            {
                found.Add("no ledger yet");
                continue;
            }

            using var book = Bookkeeper.Open(ledger);
            var report = book.Verify();
            Assert.True(report.Valid, $"search killed at {delay:0} ms: {report.Problem}");
            var holdouts = book.Store.Holdouts();
            var looks = holdouts.Count == 0 ? 0 : book.Store.Looks(holdouts[0]).Count;
            if (holdouts.Count > 0)
            {
                Assert.Equal(Enumerable.Range(1, looks), book.Store.Looks(holdouts[0]).Select(l => l.Number));
                Assert.All(book.Store.Looks(holdouts[0]), l => Assert.True(l.HasLosses)); // no look without its per-example losses
            }

            Assert.InRange(looks, 0, 6);
            found.Add($"{looks} look(s) at {delay:0} ms");
        }

        output.WriteLine($"{SearchKills} SIGKILLs of 'search' (6 looks, uninterrupted {duration:0} ms): {string.Join("; ", found)}; every ledger verified.");
    }

    [Fact]
    public void Init_killed_at_random_moments_leaves_a_whole_ledger_or_none()
    {
        // A new SQLite ledger is built under a temporary name and moved into place: after a kill at any moment there is
        // either no file at the path or a ledger that opens and verifies, never an empty or half-made file that the next
        // run would have to refuse.
        using var cli = new CliHarness();
        // The first run warms the disk cache; the second tells how long an init takes here.
        Assert.Equal(0, Processes.Run(Processes.Cli, "init", "--ledger", Path.Combine(cli.Folder, "warm.db")).Exit);
        var timer = Stopwatch.StartNew();
        Assert.Equal(0, Processes.Run(Processes.Cli, "init", "--ledger", Path.Combine(cli.Folder, "whole.db")).Exit);
        var duration = timer.Elapsed.TotalMilliseconds;
        var random = new Random(11);
        int none = 0, whole = 0;
        const int kills = 30;
        for (var kill = 0; kill < kills; kill++)
        {
            var ledger = Path.Combine(cli.Folder, $"init-{kill}.db");
            // Stratified over 30–130% of an uninterrupted init, so that kills land before, during and after the creation.
            var delay = (0.3 + (kill + random.NextDouble()) / kills) * duration;
            using (var running = new Processes.Running(Processes.Cli, ["init", "--ledger", ledger]))
            {
                Thread.Sleep(TimeSpan.FromMilliseconds(delay));
                running.Kill();
            }

            if (!File.Exists(ledger))
            {
                none++;
                Assert.Equal(0, cli.Run("init", "--ledger", ledger).Exit); // nothing in the way of a new one
            }
            else
            {
                whole++;
            }

            using var book = Bookkeeper.Open(ledger);
            Assert.True(book.Verify().Valid);
            Assert.Empty(book.Store.Holdouts());
        }

        output.WriteLine($"{kills} SIGKILLs of 'init' (uninterrupted {duration:0} ms): {none} left no ledger, {whole} a whole one, none an empty or partial file.");
    }
}
