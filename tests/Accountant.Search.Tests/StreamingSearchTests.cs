using System.Globalization;
using System.Text;
using Accountant.Ledger;
using Accountant.Search.Data;

namespace Accountant.Search.Tests;

/// <summary>
/// Searches that stream their file: every row checked in a first pass before the ledger is touched, rows split as they
/// pass, parts capped by a seeded sample, and the sealed rows rebuilt by unseal from the record. The references are the
/// files' own contents (the line a defect was written on, the rows a file holds) and the ledger's fingerprint of a
/// holdout's ids and labels.
/// </summary>
public sealed class StreamingSearchTests() : TempFolder("accountant-stream-")
{
    private string Ledger => Path.Combine(Folder, "ledger.db");

    /// <summary>One quick trainer, so that a search spends its time reading, not training.</summary>
    private string QuickSpace()
    {
        var path = Path.Combine(Folder, "space.json");
        File.WriteAllText(path, """{"trainers":[{"trainer":"lbfgs-logistic","parameters":{"l2":{"scale":"choice","values":[0.5]},"l1":{"scale":"choice","values":[0.0001]}}}]}""");
        return path;
    }

    [Fact]
    public void A_file_broken_deep_inside_fails_naming_the_line_and_writes_nothing_not_even_the_holdout()
    {
        // 3,000 days: the header is line 1 and day k (k = 1…3,000) is line k + 1.
        var good = File.ReadAllLines(BakeryFile.Write(Folder, 3000));
        var fields = good[1].Split(',').Length;
        string Write(string name, Func<string[], string> change)
        {
            var path = Path.Combine(Folder, name);
            File.WriteAllText(path, change((string[])good.Clone()));
            return path;
        }

        string Joined(string[] lines) => string.Join('\n', lines) + "\n";
        string Line(string[] lines, int line, Func<string, string> change)
        {
            lines[line - 1] = change(lines[line - 1]);
            return Joined(lines);
        }

        var cases = new (string Path, string Says)[]
        {
            // The file ends in the middle of its last row, as a copy cut short does.
            (Write("cut.csv", l => { var text = string.Join('\n', l); var last = l[^1]; return text[..(text.Length - last.Length + last.IndexOf(',', last.IndexOf(',') + 1))]; }), $"line 3001 has 2 fields but the header has {fields}"),
            (Write("open-quote.csv", l => Line(l, 2500, s => string.Join(',', s.Split(',').Select((v, i) => i == 1 ? "\"" + v : v)))), "ends inside a quoted field that starts on line 2500"),
            (Write("extra.csv", l => Line(l, 2200, s => s + ",surplus")), $"line 2200 has {fields + 1} fields but the header has {fields}"),
            (Write("nul.csv", l => Line(l, 1800, s => s.Replace(",", ",\0", StringComparison.Ordinal))), "line 1800 holds a NUL character or bytes that are not valid UTF-8"),
            (Write("unlabelled.csv", l => Line(l, 2900, s => s[..s.LastIndexOf(',')] + ",")), "line 2900 has no value in the label column 'sold_out'"),
        };
        // Bytes that are not UTF-8, deep in the file (after the reader's first buffers).
        var bytes = Encoding.UTF8.GetBytes(Joined(good));
        var at = Encoding.UTF8.GetByteCount(string.Join('\n', good.Take(1999)) + "\n") + 4; // inside line 2000
        var latin = Path.Combine(Folder, "latin.csv");
        File.WriteAllBytes(latin, [.. bytes[..at], 0xE9, .. bytes[at..]]);
        cases = [.. cases, (latin, "line 2000 holds a NUL character or bytes that are not valid UTF-8")];

        Bookkeeper.Create(Ledger).Dispose();
        foreach (var (path, says) in cases)
        {
            using var book = Bookkeeper.Open(Ledger);
            var thrown = Record.Exception(() => new TabularSearch(book, Ledger).Run(new TabularSearchOptions
            {
                DataPath = path, Label = "sold_out", IdColumn = "day", Looks = 1, SpacePath = QuickSpace(),
            }));
            var error = Assert.IsType<AccountantException>(thrown, exactMatch: false);
            Assert.Equal(ErrorKind.BadInput, error.Kind);
            Assert.Contains(says, error.Message);
            Assert.Contains(path, error.Message);
            Assert.DoesNotContain('\n', error.Message);
            Assert.Empty(book.Store.Holdouts());
            Assert.Null(book.Store.ChainHead());
        }

        // A separate validation file checked against the main file's columns, deep inside too.
        var validation = Write("validation.csv", l => Line(l, 1500, s => string.Join(',', s.Split(',').Select((v, i) => i == 2 ? "warm" : v))));
        using (var book = Bookkeeper.Open(Ledger))
        {
            var error = Assert.Throws<AccountantException>(() => new TabularSearch(book, Ledger).Run(new TabularSearchOptions
            {
                DataPath = Write("main.csv", Joined), ValidationPath = validation, Label = "sold_out", IdColumn = "day", Looks = 1, SpacePath = QuickSpace(),
            }));
            Assert.Contains("line 1500: 'warm' in the numeric column 'temperature' is not a number", error.Message);
            Assert.Null(book.Store.ChainHead());
        }
    }

    /// <summary>Rows whose label follows x1 and a weekday, so the search has something to find; written in label order.</summary>
    private string Wide(int rows, string name = "wide.csv")
    {
        var random = new Random(8);
        var text = new StringBuilder("id,x1,x2,weekday,label\n");
        var lines = new List<(bool Label, string Line)>();
        for (var i = 0; i < rows; i++)
        {
            var x1 = random.NextDouble();
            var weekday = BakeryScenario_Weekdays[random.Next(7)];
            var label = x1 + (weekday is "Sat" or "Sun" ? 0.3 : 0) + 0.3 * random.NextDouble() > 0.8;
            lines.Add((label, string.Create(CultureInfo.InvariantCulture, $"r{i},{x1:F4},{random.NextDouble():F4},{weekday},{(label ? "yes" : "no")}")));
        }

        foreach (var (_, line) in lines.OrderBy(l => l.Label)) text.Append(line).Append('\n');
        var path = Path.Combine(Folder, name);
        File.WriteAllText(path, text.ToString());
        return path;
    }

    private static readonly string[] BakeryScenario_Weekdays = Demo.BakeryScenario.Weekdays;

    [Fact]
    public void Parts_over_the_cap_keep_a_seeded_stratified_sample_and_unseal_rebuilds_exactly_the_sealed_rows()
    {
        // 70,000 rows (more than one progress report's worth, 65,536): 42,000 training, 14,000 validation and 14,000 test
        // rows before the cap of 1,000 each.
        var data = Wide(70_000);
        var reports = new List<SearchProgress>();
        var notes = new List<string>();
        var options = new TabularSearchOptions { DataPath = data, Label = "label", IdColumn = "id", Looks = 1, Seed = 3, SpacePath = QuickSpace(), MaxTrainingRows = 1000, MaxValidationRows = 1000, MaxTestRows = 1000 };
        TabularSearchOutcome outcome;
        using (var book = Bookkeeper.Create(Ledger))
        {
            outcome = new TabularSearch(book, Ledger).Run(options, new Progress(reports), notes.Add);
        }

        Assert.Equal((1000, 1000, 1000, 67_000L), (outcome.TrainingRows, outcome.ValidationRows, outcome.TestRows, outcome.LeftOut));
        Assert.Contains(notes, n => n.StartsWith("the training rows are capped at 1,000 (--max-training-rows): a seeded sample, stratified by class, is kept and 41,000 are left out", StringComparison.Ordinal));
        // Both passes reported their progress, ending at the whole file, before the first look.
        var reading = reports.Where(r => r.Reading is not null).ToList();
        Assert.Contains(reading, r => r.Current.Contains("pass 1 of 2", StringComparison.Ordinal) && r.Reading == 1.0);
        Assert.Contains(reading, r => r.Current.Contains("pass 2 of 2", StringComparison.Ordinal) && r.Reading == 1.0);
        Assert.All(reading, r => Assert.Equal(0, r.Done));

        var record = SearchRecord.Read(outcome.RecordPath);
        Assert.Equal((1000L, 1000L, 1000L), (record.MaxTrainingRows, record.MaxValidationRows, record.MaxTestRows));
        Assert.Equal((1000, 1000, 1000), (record.TrainingRows, record.ValidationRows, record.TestRows));
        Assert.Equal([41_000L, 13_000, 13_000], record.LeftOut);
        using var reader = Bookkeeper.Open(Ledger);
        var holdout = reader.Holdout("wide-validation");
        // The sample is stratified: both classes in the file's proportion (to within the rounding of the apportionment).
        var yes = File.ReadLines(data).Skip(1).Count(l => l.EndsWith(",yes", StringComparison.Ordinal));
        Assert.InRange(reader.Store.Examples(holdout).Count(e => e.Label == "yes"), Math.Floor(1000.0 * yes / 70_000) - 1, Math.Ceiling(1000.0 * yes / 70_000) + 1);

        // Unseal rebuilds the same sealed rows: the fingerprint of their ids and labels is the one the search recorded, twice.
        var search = new TabularSearch(reader, Ledger);
        var first = search.ScoreTest(record);
        Assert.Equal(record.TestFingerprint, first.Fingerprint);
        Assert.Equal((1000, first.Fingerprint), (search.ScoreTest(record).Rows, search.ScoreTest(record).Fingerprint));

        // A sealed row's id changed in the file (its class counts, and so the split, unchanged) is caught.
        var lines = File.ReadAllLines(data);
        var validationIds = reader.Store.Examples(holdout).Select(e => e.Id).ToHashSet();
        for (var i = 1; ; i++)
        {
            Assert.True(i < lines.Length, "no sealed row was found");
            if (validationIds.Contains(lines[i].Split(',')[0])) continue;
            var changed = (string[])lines.Clone();
            changed[i] = "renamed-" + changed[i];
            File.WriteAllLines(data, changed);
            try
            {
                search.ScoreTest(record); // a training or left-out row: the sealed rows are unchanged, so try the next one
            }
            catch (AccountantException refused)
            {
                Assert.Equal(ErrorKind.BadInput, refused.Kind);
                Assert.Contains("no longer gives the sealed test rows the search recorded", refused.Message);
                break;
            }
        }
    }

    private sealed class Progress(List<SearchProgress> reports) : IProgress<SearchProgress>
    {
        public void Report(SearchProgress value) => reports.Add(value);
    }
}
