using System.Globalization;
using System.Text;
using System.Xml.Linq;
using Accountant.Search.Data;
using Accountant.Search.Demo;
using Accountant.Search.Plots;

namespace Accountant.Search.Tests;

public sealed class TabularSearchTests : IDisposable
{
    private readonly string _folder = Path.Combine(Path.GetTempPath(), "accountant-tabular-" + Guid.NewGuid().ToString("N"));

    public TabularSearchTests() => Directory.CreateDirectory(_folder);

    public void Dispose()
    {
        try { Directory.Delete(_folder, true); } catch (IOException) { }
    }

    private string Ledger => Path.Combine(_folder, "ledger.db");

    private string BakeryCsv(int rows, int seed = 3, string name = "bakery.csv") => BakeryFile.Write(_folder, rows, seed, name);

    private TabularSearchOutcome Search(TabularSearchOptions options)
    {
        using var book = Bookkeeper.OpenOrCreate(Ledger);
        return new TabularSearch(book, Ledger).Run(options);
    }

    [Fact]
    public void A_search_registers_the_validation_rows_records_every_look_and_unseals_twice_with_a_warning()
    {
        var data = BakeryCsv(900);
        var options = new TabularSearchOptions { DataPath = data, Label = "sold_out", IdColumn = "day", Looks = 5, Seed = 2 };
        var outcome = Search(options);
        Assert.Equal(TaskKind.Binary, outcome.Task);
        Assert.True(outcome.TaskInferred);
        Assert.Equal((540, 180, 180), (outcome.TrainingRows, outcome.ValidationRows, outcome.TestRows));
        Assert.True(File.Exists(outcome.ModelPath));

        using var book = Bookkeeper.Open(Ledger);
        var holdout = book.Holdout("bakery-validation");
        var ids = book.Store.Examples(holdout).Select(e => e.Id).ToHashSet();
        Assert.Equal(180, ids.Count);
        Assert.All(ids, id => Assert.StartsWith("day-", id));
        var looks = book.Store.Looks(holdout);
        Assert.Equal(5, looks.Count);
        Assert.All(looks, l => Assert.True(l.HasLosses && l.Seconds is not null && !l.Adaptive));

        var record = SearchRecord.Read(TabularSearch.RecordPathFor(book.Store, holdout.Name));
        var search = new TabularSearch(book, Ledger);
        var first = search.ScoreTest(record);
        book.RecordOpening(holdout.Name, record.Look, first.Rows, first.Fingerprint, first.Score);
        var second = search.ScoreTest(record);
        book.RecordOpening(holdout.Name, record.Look, second.Rows, second.Fingerprint, second.Score);
        Assert.Equal(first, second); // the same model on the same sealed rows
        var statement = book.Statement(holdout.Name);
        Assert.Equal(2, statement.TestOpenings);
        Assert.Contains(statement.Warnings, w => w.Code == "test-reopened");
        Assert.True(book.Verify().Valid);

        // A configuration recorded after the opening that becomes the best is flagged.
        var perfect = book.Store.Examples(holdout).Select(e => new Ledger.Prediction(e.Id, e.Label)).ToList();
        var late = book.Record(holdout.Name, """{"trainer":"chosen-after-the-test"}""", perfect);
        var after = book.Statement(holdout.Name);
        Assert.Equal(late.Number, after.Best!.Number);
        Assert.Contains(after.Warnings, w => w.Code == "selected-after-unseal");
    }

    [Fact]
    public void Halving_records_every_stage_as_a_look_and_flags_promoted_looks_as_adaptive()
    {
        var outcome = Search(new TabularSearchOptions { DataPath = BakeryCsv(600), Label = "sold_out", Looks = 9, Strategy = "halving", Seed = 4 });
        using var book = Bookkeeper.Open(Ledger);
        var looks = book.Store.Looks(book.Holdout("bakery-validation"));
        // η = 3, K = 9: 9 configurations at 1/9 of the training rows, 3 at 1/3, 1 at all of them.
        Assert.Equal(13, looks.Count);
        Assert.Equal(Enumerable.Repeat("0.1111", 9).Concat(Enumerable.Repeat("0.3333", 3)).Append("1"), looks.Select(l => l.Stage));
        Assert.Equal(Enumerable.Range(0, 13).Select(i => i >= 9), looks.Select(l => l.Adaptive));
        // Promoted configurations are among the first rung's.
        var first = looks.Take(9).Select(l => l.Configuration).ToHashSet();
        Assert.All(looks.Skip(9), l => Assert.Contains(l.Configuration, first));
        Assert.Equal("adaptive-transcript", outcome.Statement.Primary!.Method);
        Assert.Contains(outcome.Statement.Warnings, w => w.Code == "adaptive-unguarded");
    }

    [Fact]
    public void Multiclass_and_regression_searches_run_on_their_own_trainers()
    {
        var rows = new StringBuilder("x1,x2,colour,kind,amount\n");
        var random = new Random(1);
        for (var i = 0; i < 400; i++)
        {
            var x1 = random.NextDouble();
            var x2 = random.NextDouble();
            var kind = x1 + 0.2 * random.NextDouble() > 0.7 ? "high" : x2 > 0.5 ? "mid" : "low";
            var amount = 3 * x1 - 2 * x2 + random.NextDouble();
            rows.Append(CultureInfo.InvariantCulture, $"{x1:F4},{(i % 17 == 0 ? "" : x2.ToString("F4", CultureInfo.InvariantCulture))},{(i % 2 == 0 ? "red" : "blue")},{kind},{amount:F4}\n");
        }

        var path = Path.Combine(_folder, "mixed.csv");
        File.WriteAllText(path, rows.ToString());
        var multiclass = Search(new TabularSearchOptions { DataPath = path, Label = "kind", Ignore = ["amount"], Looks = 4, HoldoutName = "kinds" });
        Assert.Equal(TaskKind.Multiclass, multiclass.Task);
        Assert.Equal(4, multiclass.Statement.Looks);
        Assert.True(multiclass.Statement.Best!.Score < 0.5, $"best multiclass error {multiclass.Statement.Best!.Score}");
        var regression = Search(new TabularSearchOptions { DataPath = path, Label = "amount", Ignore = ["kind"], Looks = 4, HoldoutName = "amounts" });
        Assert.Equal(TaskKind.Regression, regression.Task);
        Assert.Equal(Metric.AbsoluteError, regression.Statement.Holdout.Metric);
        Assert.Contains(regression.Statement.Bounds, b => b.Method == "empirical-bernstein-union");
    }

    [Fact]
    public void Bad_input_gives_one_clear_error_and_no_ledger_rows()
    {
        var good = BakeryCsv(300);
        var empty = Path.Combine(_folder, "empty.csv");
        File.WriteAllText(empty, "");
        var constant = Path.Combine(_folder, "constant.csv");
        File.WriteAllText(constant, "a,b,y\n" + string.Concat(Enumerable.Range(0, 50).Select(i => $"{i},{i % 3},same\n")));
        var rare = Path.Combine(_folder, "rare.csv");
        File.WriteAllText(rare, "a,y\n" + string.Concat(Enumerable.Range(0, 60).Select(i => $"{i},{(i == 0 ? "lonely" : i % 2 == 0 ? "p" : "q")}\n")));
        var textInNumbers = Path.Combine(_folder, "validation.csv");
        var lines = File.ReadAllLines(good);
        var cells = lines[5].Split(',');
        cells[2] = "warm"; // the temperature column
        lines[5] = string.Join(',', cells);
        File.WriteAllLines(textInNumbers, lines);
        var cases = new (TabularSearchOptions Options, string Expect)[]
        {
            (new() { DataPath = good, Label = "missing_column" }, "no column 'missing_column'"),
            (new() { DataPath = empty, Label = "y" }, "is empty"),
            (new() { DataPath = constant, Label = "y" }, "single value"),
            (new() { DataPath = rare, Label = "y" }, "'lonely' has only 1 example"),
            (new() { DataPath = good, Label = "sold_out", ValidationPath = textInNumbers }, "is not a number"),
            (new() { DataPath = good, Label = "sold_out", Ignore = ["nope"] }, "no column 'nope'"),
        };
        foreach (var (options, expect) in cases)
        {
            var error = Assert.Throws<AccountantException>(() => Search(options));
            Assert.Contains(expect, error.Message);
            Assert.DoesNotContain('\n', error.Message);
        }

        using var book = Bookkeeper.Open(Ledger);
        Assert.Empty(book.Store.Holdouts());
    }

    [Fact]
    public void Plots_are_written_as_png_of_the_stated_size_and_as_svg_that_parses()
    {
        var outcome = Search(new TabularSearchOptions { DataPath = BakeryCsv(300), Label = "sold_out", Looks = 4 });
        using var book = Bookkeeper.Open(Ledger);
        var png = Path.Combine(_folder, "looks.png");
        var svg = Path.Combine(_folder, "looks.svg");
        StatementPlot.Write(book, outcome.Statement.Holdout.Name, png, new Statements.StatementOptions());
        StatementPlot.Write(book, outcome.Statement.Holdout.Name, svg, new Statements.StatementOptions());
        var header = File.ReadAllBytes(png);
        Assert.Equal([0x89, (byte)'P', (byte)'N', (byte)'G'], header.Take(4));
        // IHDR: width and height, big-endian, at bytes 16–23 (PNG specification, ISO/IEC 15948).
        Assert.Equal(StatementPlot.Width, System.Buffers.Binary.BinaryPrimitives.ReadInt32BigEndian(header.AsSpan(16, 4)));
        Assert.Equal(StatementPlot.Height, System.Buffers.Binary.BinaryPrimitives.ReadInt32BigEndian(header.AsSpan(20, 4)));
        Assert.True(header.Length > 10_000);
        var document = XDocument.Load(svg);
        Assert.Equal("svg", document.Root!.Name.LocalName);
        Assert.True(document.Descendants().Count() > 50);
        var series = StatementPlot.Compute(book, outcome.Statement.Holdout.Name, new Statements.StatementOptions());
        Assert.Equal([1.0, 2, 3, 4], series.Looks);
        Assert.All(series.Bounds["binomial-union"].Zip(series.Best), p => Assert.True(p.First >= p.Second));
        Assert.Throws<AccountantException>(() => StatementPlot.CheckPath(Path.Combine(_folder, "x.gif")));
    }
}
