using System.Diagnostics;
using System.Security.Cryptography;
using System.Text;
using Microsoft.Data.Sqlite;
using Xunit.Abstractions;

namespace Accountant.Cli.Tests.Reliability;

/// <summary>
/// The world around the ledger fails: the file or its folder is read-only, the disk is full, the file is not a ledger or
/// comes from a newer accountant. Each ends in one clear line and the "ledger unusable" exit code, and the ledger is left
/// as it was. Root ignores file permissions, so read-only is made with the immutable attribute (chattr +i) and a full
/// disk with a small tmpfs; both need root, and the tests say so and stop when they do not have it.
/// </summary>
public sealed class EnvironmentFaultTests(ITestOutputHelper output) : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    private static bool IsRoot => Environment.UserName == "root" || Run("id", "-u").Out.Trim() == "0";

    private static (int Exit, string Out) Run(string file, params string[] args)
    {
        var info = new ProcessStartInfo(file) { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false };
        foreach (var a in args) info.ArgumentList.Add(a);
        Process process;
        try
        {
            process = Process.Start(info)!;
        }
        catch (System.ComponentModel.Win32Exception e)
        {
            return (127, $"{file}: {e.Message}"); // not installed
        }

        using var _ = process;
        var text = process.StandardOutput.ReadToEnd() + process.StandardError.ReadToEnd();
        process.WaitForExit();
        return (process.ExitCode, text);
    }

    private bool Skip(string what)
    {
        if (IsRoot) return false;
        output.WriteLine($"skipped: {what} needs root (chattr +i and mount -t tmpfs); the tests ran as '{Environment.UserName}'.");
        return true;
    }

    /// <summary>Sets the immutable attribute, or says why it cannot (a file system or container without it).</summary>
    private bool Immutable(string path)
    {
        var result = Run("chattr", "+i", path);
        if (result.Exit == 0) return true;
        output.WriteLine($"skipped: chattr +i failed here ({result.Out.Trim()}); a read-only ledger cannot be made for root.");
        return false;
    }

    private void Ledger(int looks = 2)
    {
        Assert.Equal(0, _cli.Run("init").Exit);
        Assert.Equal(0, _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(20)).Exit);
        for (var i = 0; i < looks; i++) Assert.Equal(0, _cli.Run("record", "validation", "--configuration", $"{{\"k\":{i}}}", "--score", "0.3").Exit);
    }

    private static void AssertOneLine(CliHarness.Result result, int exit, string words)
    {
        Assert.Equal(exit, result.Exit);
        var line = Assert.Single(result.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries));
        Assert.StartsWith("accountant: ", line);
        Assert.Contains(words, line);
    }

    private static string Digest(string path) => Convert.ToHexString(SHA256.HashData(File.ReadAllBytes(path)));

    private CliHarness.Result Record(string configuration = "{\"k\":99}") => _cli.Run("record", "validation", "--configuration", configuration, "--score", "0.2");

    [Fact]
    public void A_read_only_ledger_file_refuses_writes_with_one_line_and_stays_readable()
    {
        if (Skip("a read-only ledger file")) return;
        Ledger();
        var before = Digest(_cli.Ledger);
        if (!Immutable(_cli.Ledger)) return;
        try
        {
            AssertOneLine(Record(), ExitCodes.LedgerUnusable, "read-only");
            AssertOneLine(_cli.Run("import", "validation", _cli.Write("looks.jsonl", "{\"configuration\":{\"k\":5},\"score\":0.1}\n")), ExitCodes.LedgerUnusable, "read-only");
            var verify = _cli.Run("verify");
            output.WriteLine($"verify on the immutable ledger: exit {verify.Exit}: {verify.Out.Trim()}{verify.Err.Trim()}");
            Assert.Equal(0, verify.Exit);
            Assert.Contains("3 entries", verify.Out);
        }
        finally
        {
            Run("chattr", "-i", _cli.Ledger);
        }

        Assert.Equal(before, Digest(_cli.Ledger));
        Assert.Equal(0, Record().Exit); // writable again, it takes the look
    }

    [Fact]
    public void A_read_only_folder_refuses_writes_and_a_new_ledger_with_one_line()
    {
        if (Skip("a read-only folder")) return;
        Ledger();
        var before = Digest(_cli.Ledger);
        if (!Immutable(_cli.Folder)) return;
        try
        {
            // The journal (-wal, -shm) cannot be created beside the ledger.
            var record = Record();
            output.WriteLine($"record in an immutable folder: exit {record.Exit}: {record.Err.Trim()}");
            Assert.Equal(ExitCodes.LedgerUnusable, record.Exit);
            Assert.Single(record.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries));
            AssertOneLine(_cli.Run("init", "--ledger", Path.Combine(_cli.Folder, "other.db")), ExitCodes.LedgerUnusable, "other.db");
            Assert.False(File.Exists(Path.Combine(_cli.Folder, "other.db")));
        }
        finally
        {
            Run("chattr", "-i", _cli.Folder);
        }

        Assert.Equal(before, Digest(_cli.Ledger));
        using var book = Bookkeeper.Open(_cli.Ledger);
        Assert.Equal(2, book.Store.Looks(book.Holdout("validation")).Count);
        Assert.True(book.Verify().Valid);
    }

    [Fact]
    public void A_full_disk_refuses_a_look_and_a_whole_import_and_keeps_the_ledger_intact()
    {
        if (Skip("a full disk")) return;
        var mount = Path.Combine(_cli.Folder, "small");
        Directory.CreateDirectory(mount);
        var mounted = Run("mount", "-t", "tmpfs", "-o", "size=2m", "tmpfs", mount);
        if (mounted.Exit != 0)
        {
            output.WriteLine($"skipped: mount -t tmpfs failed ({mounted.Out.Trim()}); a full disk cannot be made here.");
            return;
        }

        try
        {
            var ledger = Path.Combine(mount, "ledger.db");
            Assert.Equal(0, _cli.Run("init", "--ledger", ledger).Exit);
            Assert.Equal(0, _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(20), "--ledger", ledger).Exit);
            Assert.Equal(0, _cli.Run("record", "validation", "--configuration", "{\"k\":0}", "--score", "0.3", "--ledger", ledger).Exit);
            string head;
            using (var book = Bookkeeper.Open(ledger)) head = book.Store.ChainHead()!;

            // Fill the disk to the last byte.
            var filler = Path.Combine(mount, "filler");
            Fill(filler, FileMode.Create);

            // Leave 256 KB free: the import starts writing and runs out part-way through its transaction.
            using (var stream = new FileStream(filler, FileMode.Open)) stream.SetLength(stream.Length - 256 * 1024);
            var lines = new StringBuilder();
            for (var i = 0; i < 5000; i++) lines.Append($"{{\"configuration\":{{\"trainer\":\"a fairly long trainer name to take up space\",\"k\":{i}}},\"score\":0.25}}\n");
            var import = _cli.Run("import", "validation", _cli.Write("looks.jsonl", lines.ToString()), "--ledger", ledger);
            output.WriteLine($"import of 5000 looks with 256 KB left on a 2 MB tmpfs: exit {import.Exit}: {import.Err.Trim()}");
            using (var book = Bookkeeper.Open(ledger)) Assert.Equal(head, book.Store.ChainHead()); // not a part of the import
            Fill(filler, FileMode.Append); // and now to the last byte

            AssertOneLine(import, ExitCodes.LedgerUnusable, "full");
            var record = _cli.Run("record", "validation", "--configuration", "{\"k\":1}", "--score", "0.3", "--ledger", ledger);
            output.WriteLine($"record on the full disk: exit {record.Exit}: {record.Err.Trim()}");
            AssertOneLine(record, ExitCodes.LedgerUnusable, "full");

            File.Delete(filler);
            using (var book = Bookkeeper.Open(ledger))
            {
                Assert.True(book.Verify(head).Valid);
                Assert.Equal(head, book.Store.ChainHead()); // nothing of the import, nothing of the look
                Assert.Single(book.Store.Looks(book.Holdout("validation")));
            }

            Assert.Equal(0, _cli.Run("record", "validation", "--configuration", "{\"k\":1}", "--score", "0.3", "--ledger", ledger).Exit);
        }
        finally
        {
            SqliteConnection.ClearAllPools();
            var unmounted = Run("umount", mount);
            if (unmounted.Exit != 0) Run("umount", "-l", mount);
        }
    }

    /// <summary>Writes zeros to <paramref name="path"/> until the disk is full.</summary>
    private static void Fill(string path, FileMode mode)
    {
        var stream = new FileStream(path, mode);
        var block = new byte[4096];
        try
        {
            while (true) stream.Write(block);
        }
        catch (IOException)
        {
        }

        try { stream.Dispose(); } catch (IOException) { }
    }

    [Fact]
    public void Files_that_are_not_ledgers_are_refused_and_left_untouched()
    {
        var text = _cli.Write("notes.db", "holdout,score\nvalidation,0.1\n");
        var random = Path.Combine(_cli.Folder, "random.db");
        File.WriteAllBytes(random, [.. "SQLite format 3\0"u8, .. RandomNumberGenerator.GetBytes(4080)]);
        var foreign = Path.Combine(_cli.Folder, "foreign.db");
        using (var connection = new SqliteConnection($"Data Source={foreign};Pooling=False"))
        {
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = "CREATE TABLE looks (x); INSERT INTO looks VALUES (1);";
            command.ExecuteNonQuery();
        }

        var empty = _cli.Write("empty.db", "");
        foreach (var path in new[] { text, random, foreign, empty })
        {
            var before = Digest(path);
            foreach (var args in new[] { new[] { "record", "validation", "--configuration", "{\"k\":1}", "--score", "0.2" }, ["verify"], ["statement", "validation"] })
            {
                var result = _cli.Run([.. args, "--ledger", path]);
                Assert.True(result.Exit is ExitCodes.LedgerUnusable or ExitCodes.LedgerIntegrity, $"{Path.GetFileName(path)} {args[0]}: exit {result.Exit}: {result.Err}");
                Assert.Single(result.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries));
                Assert.Contains("ledger", result.Err);
            }

            Assert.Equal(before, Digest(path));
        }

        AssertOneLine(_cli.Run("verify", "--ledger", _cli.Folder), ExitCodes.LedgerUnusable, _cli.Folder);
    }

    [Fact]
    public void A_ledger_from_a_newer_schema_is_refused_by_every_verb_and_left_unchanged()
    {
        Ledger();
        using (var connection = new SqliteConnection($"Data Source={_cli.Ledger};Pooling=False"))
        {
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = $"PRAGMA user_version = {Accountant.Ledger.SqliteLedgerStore.SchemaVersion + 1};";
            command.ExecuteNonQuery();
        }

        var before = Digest(_cli.Ledger);
        foreach (var args in new[] { new[] { "record", "validation", "--configuration", "{\"k\":1}", "--score", "0.2" }, ["verify"], ["statement", "validation"], ["import", "validation", _cli.Write("l.jsonl", "{\"configuration\":{},\"score\":0.1}\n")] })
        {
            AssertOneLine(_cli.Run(args), ExitCodes.LedgerUnusable, "newer");
        }

        Assert.Equal(before, Digest(_cli.Ledger));
    }
}
