using System.Text;
using System.Text.Json;

namespace Accountant.Cli.Tests.Reliability;

/// <summary>Names and configurations that look like SQL are data: stored verbatim, never part of SQL text. Line ends and a UTF-8 BOM do not change what a file means.</summary>
public sealed class VerbatimTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    [Fact]
    public void Sql_in_names_configurations_and_labels_is_stored_verbatim_and_harms_nothing()
    {
        const string holdout = "v'); DROP TABLE looks; --";
        const string search = "\"; DELETE FROM entries; --";
        const string stage = "' OR 1=1; UPDATE looks SET score = 0; --";
        const string configuration = "{\"trainer\":\"x'); DROP TABLE entries; --\",\"leaves\":31}";
        Assert.Equal(0, _cli.Run("init").Exit);
        var labels = _cli.Write("labels.csv", "id,label\n\"'; DROP TABLE holdouts; --\",1\nb,0\nc,1\n");
        Assert.Equal(0, _cli.Run("holdout", "add", holdout, "--labels", labels).Exit);
        var record = _cli.Run("record", holdout, "--configuration", configuration, "--score", "0.5", "--search", search, "--stage", stage);
        Assert.Equal(0, record.Exit);

        using var book = Bookkeeper.Open(_cli.Ledger);
        var stored = book.Holdout(holdout);
        Assert.Equal(holdout, stored.Name);
        var look = Assert.Single(book.Store.Looks(stored));
        Assert.Equal(search, look.Search);
        Assert.Equal(stage, look.Stage);
        Assert.Equal(0.5, look.Score);
        var json = JsonDocument.Parse(look.Configuration).RootElement;
        Assert.Equal("x'); DROP TABLE entries; --", json.GetProperty("trainer").GetString());
        Assert.True(book.Verify().Valid);
        Assert.Equal(2, book.Verify().Entries); // the holdout and the look; nothing dropped, nothing deleted
    }

    [Fact]
    public void Crlf_bare_cr_and_a_bom_give_the_same_holdout_as_lf()
    {
        Assert.Equal(0, _cli.Run("init").Exit);
        var text = "id,label\n" + string.Concat(Enumerable.Range(1, 12).Select(i => $"e{i},{i % 3}\n"));
        var fingerprints = new List<string>();
        foreach (var (name, bytes) in new[]
        {
            ("lf", Encoding.UTF8.GetBytes(text)),
            ("crlf", Encoding.UTF8.GetBytes(text.Replace("\n", "\r\n", StringComparison.Ordinal))),
            ("cr", Encoding.UTF8.GetBytes(text.Replace("\n", "\r", StringComparison.Ordinal))),
            ("bom", [0xEF, 0xBB, 0xBF, .. Encoding.UTF8.GetBytes(text)]),
            ("utf16", [0xFF, 0xFE, .. Encoding.Unicode.GetBytes(text.Replace("\n", "\r\n", StringComparison.Ordinal))]),
        })
        {
            var path = Path.Combine(_cli.Folder, name + ".csv");
            File.WriteAllBytes(path, bytes);
            Assert.Equal(0, _cli.Run("holdout", "add", name, "--labels", path).Exit);
            using var book = Bookkeeper.Open(_cli.Ledger);
            var holdout = book.Holdout(name);
            Assert.Equal(12, holdout.Size);
            fingerprints.Add(holdout.Fingerprint);
        }

        Assert.Single(fingerprints.Distinct());
    }
}
