using System.Diagnostics;
using Accountant.Input;
using System.Text;
using Xunit.Abstractions;

namespace Accountant.Cli.Tests.Reliability;

/// <summary>
/// A generated corpus of malformed inputs, every one run through the command line in-process. Each must end with one
/// clear line on stderr and the exit code for its kind (3, bad input, for anything wrong inside a file or value; 2, bad
/// arguments, where the argument itself is wrong, such as a name that is too long), and must leave the ledger's chain head
/// exactly as it was: never an unhandled exception, never a partial write.
/// </summary>
public sealed class BadInputCorpusTests(ITestOutputHelper output) : IDisposable
{
    private const int Examples = 20;
    private readonly CliHarness _cli = new();
    private int _files;

    public void Dispose() => _cli.Dispose();

    private sealed record Case(string Family, string What, string[] Args, int Expected);

    private static readonly string[] LineEnds = ["\n", "\r\n", "\r"];

    private static string Eol(string text, string eol) => text.Replace("\n", eol, StringComparison.Ordinal);

    private static string GoodPredictions => "id,prediction\n" + string.Concat(Enumerable.Range(1, Examples).Select(i => $"e{i},{i % 2}\n"));

    private static string GoodLabels => "id,label\n" + string.Concat(Enumerable.Range(1, Examples).Select(i => $"e{i},{i % 2}\n"));

    private string File(byte[] bytes, string extension = ".csv")
    {
        var path = Path.Combine(_cli.Folder, $"case{_files++}{extension}");
        System.IO.File.WriteAllBytes(path, bytes);
        return path;
    }

    private string File(string text, string extension = ".csv") => File(new UTF8Encoding(false).GetBytes(text), extension);

    private string[] Record(string predictions) => ["record", "validation", "--configuration", "{\"k\":1}", "--predictions", predictions];

    private static string[] Rows(string text) => text.Split('\n');

    /// <summary>Replaces data row <paramref name="row"/> (1-based) of a CSV text written with LF.</summary>
    private static string WithRow(string text, int row, string replacement)
    {
        var lines = Rows(text);
        lines[row] = replacement;
        return string.Join('\n', lines);
    }

    private IEnumerable<Case> Corpus()
    {
        var good = GoodPredictions;

        // Truncated predictions: every cut that loses at least one character of content, with each line end.
        foreach (var eol in LineEnds)
        {
            var text = Eol(good, eol);
            for (var k = 0; k <= text.Length - eol.Length - 1; k++)
            {
                yield return new Case("truncated predictions", $"cut at {k} ({Name(eol)})", Record(File(text[..k])), 3);
            }
        }

        // Invalid bytes for UTF-8 at spread positions.
        var bytes = Encoding.UTF8.GetBytes(good);
        byte[][] invalid = [[0xFF], [0xC3, (byte)'x'], [0x80], [0xED, 0xA0, 0x80], [0xF8, 0x88, 0x80, 0x80, 0x80]];
        for (var p = 0; p < bytes.Length; p += 5)
        {
            foreach (var bad in invalid)
            {
                yield return new Case("invalid UTF-8", $"{Convert.ToHexString(bad)} at byte {p}", Record(File([.. bytes[..p], .. bad, .. bytes[p..]])), 3);
            }
        }

        // Wrong encodings and byte-order marks.
        foreach (var eol in LineEnds)
        {
            var text = Eol(good, eol);
            yield return new Case("encoding", $"UTF-16 LE without BOM ({Name(eol)})", Record(File(new UnicodeEncoding(false, false).GetBytes(text))), 3);
            yield return new Case("encoding", $"UTF-16 BE without BOM ({Name(eol)})", Record(File(new UnicodeEncoding(true, false).GetBytes(text))), 3);
            yield return new Case("encoding", $"UTF-32 LE with BOM ({Name(eol)})", Record(File([0xFF, 0xFE, 0, 0, .. new UTF32Encoding(false, false).GetBytes(text)])), 3);
            yield return new Case("encoding", $"UTF-32 BE with BOM ({Name(eol)})", Record(File([0, 0, 0xFE, 0xFF, .. new UTF32Encoding(true, false).GetBytes(text)])), 3);
            yield return new Case("encoding", $"UTF-16 LE BOM before UTF-8 ({Name(eol)})", Record(File([0xFF, 0xFE, .. Encoding.UTF8.GetBytes(text)])), 3);
            yield return new Case("encoding", $"UTF-8 BOM before UTF-16 ({Name(eol)})", Record(File([0xEF, 0xBB, 0xBF, .. new UnicodeEncoding(false, false).GetBytes(text)])), 3);
            yield return new Case("encoding", $"Latin-1 ids ({Name(eol)})", Record(File(Encoding.Latin1.GetBytes(Eol(good.Replace("e1,", "é1,", StringComparison.Ordinal), eol)))), 3);
            yield return new Case("encoding", $"only a BOM ({Name(eol)})", Record(File([0xEF, 0xBB, 0xBF])), 3);
        }

        // Structure: headers, rows, quotes, ids; each with every line end, row defects at the first, a middle and the last row.
        var wideRow = "e1," + string.Join(',', Enumerable.Repeat("1", 10_000));
        var wideHeader = "id," + string.Join(',', Enumerable.Range(0, 5_000).Select(i => $"c{i}"));
        var structural = new List<(string What, string Text)>
        {
            ("empty file", ""),
            ("blank lines only", "\n\n\n"),
            ("spaces only", "   \n  "),
            ("header only", "id,prediction\n"),
            ("no header (data first)", string.Join('\n', Rows(good).Skip(1))),
            ("duplicate header", good.Replace("id,prediction", "id,prediction,id", StringComparison.Ordinal)),
            ("duplicate header after trimming", good.Replace("id,prediction", "id, id ,prediction", StringComparison.Ordinal)),
            ("empty column name", good.Replace("id,prediction", "id,,prediction", StringComparison.Ordinal)),
            ("missing prediction column", good.Replace("id,prediction", "id,pred", StringComparison.Ordinal)),
            ("missing id column", good.Replace("id,prediction", "key,prediction", StringComparison.Ordinal)),
            ("a line break inside a header name", good.Replace("id,prediction", "\"i\nd\",prediction", StringComparison.Ordinal)),
            ("very wide header", good.Replace("id,prediction", wideHeader, StringComparison.Ordinal)),
            ("a missing example", string.Join('\n', Rows(good).Where(l => l != "e7,1"))),
            ("an extra example", good + "e21,1\n"),
            ("a field of over a million characters", WithRow(good, 3, "e3," + new string('1', CsvTable.MaxFieldLength + 1))),
            ("a very long unknown id", WithRow(good, 3, new string('x', 100_000) + ",1")),
            ("a NUL inside a field", WithRow(good, 3, "e3,1\0")),
            ("labels that differ from the holdout's", "id,prediction,label\n" + string.Concat(Enumerable.Range(1, Examples).Select(i => $"e{i},{i % 2},{(i == 5 ? 7 : i % 2)}\n"))),
        };
        foreach (var row in new[] { 1, 10, Examples })
        {
            structural.AddRange(
            [
                ($"extra field on row {row}", WithRow(good, row, $"e{row},1,1")),
                ($"missing field on row {row}", WithRow(good, row, $"e{row}")),
                ($"unclosed quote on row {row}", WithRow(good, row, $"\"e{row},1")),
                ($"quote inside an unquoted field on row {row}", WithRow(good, row, $"e{row},1\"")),
                ($"text after a closing quote on row {row}", WithRow(good, row, $"\"e{row}\"x,1")),
                ($"quoted comma in the id on row {row}", WithRow(good, row, $"\"e{row},x\",1")),
                ($"unquoted comma in the prediction on row {row}", WithRow(good, row, $"e{row},0,5")),
                ($"duplicate id on row {row}", WithRow(good, row, row == 1 ? "e2,0" : "e1,1")),
                ($"ids that collide after trimming on row {row}", WithRow(good, row, row == 1 ? " e2 ,0" : "e1 ,1")),
                ($"empty id on row {row}", WithRow(good, row, ",1")),
                ($"spaces for an id on row {row}", WithRow(good, row, "   ,1")),
                ($"empty prediction on row {row}", WithRow(good, row, $"e{row},")),
                ($"very wide row {row}", WithRow(good, row, wideRow.Replace("e1,", $"e{row},", StringComparison.Ordinal))),
                ($"SQL as an id on row {row}", WithRow(good, row, "\"e1'); DROP TABLE looks; --\",1")),
                ($"a line break inside a quoted id on row {row}", WithRow(good, row, $"\"e\n{row}\",1")),
            ]);
        }

        foreach (var eol in LineEnds)
        {
            foreach (var (what, text) in structural)
            {
                yield return new Case("predictions structure", $"{what} ({Name(eol)})", Record(File(Eol(text, eol))), 3);
            }
        }

        // Labels for a new holdout: every one refused, so no holdout is registered.
        var labels = new List<(string What, string Text, string Metric)>
        {
            ("empty file", "", "error"),
            ("header only", "id,label\n", "error"),
            ("no label column", GoodLabels.Replace("id,label", "id,target", StringComparison.Ordinal), "error"),
            ("duplicate header", GoodLabels.Replace("id,label", "id,label,label", StringComparison.Ordinal), "error"),
            ("binary auc with a label 2", GoodLabels.Replace("e4,0", "e4,2", StringComparison.Ordinal), "auc"),
            ("auc with one class", "id,label\n" + string.Concat(Enumerable.Range(1, 10).Select(i => $"e{i},1\n")), "auc"),
            ("absolute-error with a label NaN", GoodLabels.Replace("e4,0", "e4,NaN", StringComparison.Ordinal), "absolute-error"),
            ("absolute-error with a label ∞", GoodLabels.Replace("e4,0", "e4,∞", StringComparison.Ordinal), "absolute-error"),
            ("absolute-error with a label 1e999", GoodLabels.Replace("e4,0", "e4,1e999", StringComparison.Ordinal), "absolute-error"),
            ("absolute-error with a label 0,5", GoodLabels.Replace("e4,0", "e4,\"0,5\"", StringComparison.Ordinal), "absolute-error"),
            ("absolute-error with a label -Infinity", GoodLabels.Replace("e4,0", "e4,-Infinity", StringComparison.Ordinal), "absolute-error"),
        };
        foreach (var row in new[] { 1, 10, Examples })
        {
            labels.AddRange(
            [
                ($"ids that collide after trimming on row {row}", WithRow(GoodLabels, row, row == 1 ? "e2 ,0" : " e1,1"), "error"),
                ($"ids that collide after trimming tabs on row {row}", WithRow(GoodLabels, row, row == 1 ? "\te2,0" : "e1\t,1"), "error"),
                ($"exact duplicate id on row {row}", WithRow(GoodLabels, row, row == 1 ? "e2,0" : "e1,1"), "error"),
                ($"empty id on row {row}", WithRow(GoodLabels, row, ",1"), "error"),
                ($"empty label on row {row}", WithRow(GoodLabels, row, $"e{row},"), "error"),
                ($"spaces for a label on row {row}", WithRow(GoodLabels, row, $"e{row},   "), "error"),
                ($"missing field on row {row}", WithRow(GoodLabels, row, $"e{row}"), "error"),
                ($"unclosed quote on row {row}", WithRow(GoodLabels, row, $"e{row},\"1"), "error"),
            ]);
        }

        var holdouts = 0;
        foreach (var eol in LineEnds)
        {
            foreach (var (what, text, metric) in labels)
            {
                string[] args = ["holdout", "add", $"new{holdouts++}", "--labels", File(Eol(text, eol)), "--metric", metric];
                if (metric == "absolute-error") args = [.. args, "--loss-range", "0,10"];
                yield return new Case("labels", $"{what} ({Name(eol)})", args, 3);
            }
        }

        // Numeric predictions that are not finite numbers, on a regression holdout.
        foreach (var prediction in new[] { "NaN", "Infinity", "-Infinity", "∞", "1e999", "", "abc", "0,5", "1.2.3" })
        {
            foreach (var row in new[] { 1, 10, Examples })
            {
                yield return new Case("regression predictions", $"'{prediction}' on row {row}", ["record", "regression", "--configuration", "{\"k\":1}", "--predictions", File(WithRow(good, row, $"e{row},\"{prediction}\""))], 3);
            }
        }

        // Scores that are not finite numbers in the metric's range.
        foreach (var score in new[] { "NaN", "nan", "-NaN", "Infinity", "-Infinity", "+Infinity", "∞", "-∞", "1e309", "-1e309", "1e999999", "1.5", "-0.01", "1.0000001", "2", "1e308", "0,5", "abc", "", " ", "0x1", "1e", "--1", "0.5.5", "½", "1_000", "٠٫٥", "0.1; DROP TABLE looks" })
        {
            yield return new Case("score", $"--score '{score}'", ["record", "validation", "--configuration", "{\"k\":1}", "--score", score], 3);
        }

        // Configurations that are not one JSON object, given inline and as @file.
        var deep = new string('[', 10_000) + new string(']', 10_000);
        var configurations = new[]
        {
            "{", "}", "[]", "[1]", "\"trainer\"", "1", "null", "true", "", " ", "{\"a\":}", "{\"a\":1,}", "{'a':1}", "{a:1}", "{\"a\":NaN}",
            "{\"a\":Infinity}", "{\"a\":1}x", "{\"a\":1}{\"b\":2}", "{\"a\":1,\"a\":2}", "{\"a\":{\"b\":1,\"b\":2}}", "{\"a\":1 /* note */}",
            "{\"a\":" + new string('[', 70) + new string(']', 70) + "}", "{\"a\":" + deep + "}", "{\"a\":\"unterminated}", "{\"a\":\"\\x\"}",
            "{\"a\":01}", "{\"a\":.5}", "{\"a\":+1}", "{\"a\":tru}", "{\"a\" 1}", "{\"a\":1\n\"b\":2}", "{\"'); DROP TABLE looks; --\":1,\"'); DROP TABLE looks; --\":2}", "{\"a\\nb\":1,\"a\\nb\":2}",
        };
        foreach (var configuration in configurations)
        {
            yield return new Case("configuration", $"inline {Shorten(configuration)}", ["record", "validation", "--configuration", configuration, "--score", "0.1"], 3);
            yield return new Case("configuration", $"@file {Shorten(configuration)}", ["record", "validation", "--configuration", "@" + File(configuration, ".json"), "--score", "0.1"], 3);
        }

        yield return new Case("configuration", "@file that is not UTF-8", ["record", "validation", "--configuration", "@" + File([(byte)'{', (byte)'"', 0xFF, (byte)'"', (byte)':', (byte)'1', (byte)'}'], ".json"), "--score", "0.1"], 3);
        yield return new Case("configuration", "@file that does not exist", ["record", "validation", "--configuration", "@" + Path.Combine(_cli.Folder, "missing.json"), "--score", "0.1"], 3);
        yield return new Case("predictions", "a file that does not exist", Record(Path.Combine(_cli.Folder, "missing.csv")), 3);
        yield return new Case("predictions", "a folder", Record(_cli.Folder), 3);

        // Imports (JSON Lines): 30 good looks with one bad line first, in the middle or last; nothing may be imported.
        var goodPredictionsFile = File(good);
        var badPredictionsFile = File(WithRow(good, 4, "e4"));
        string Line(int i) => $"{{\"configuration\":{{\"trainer\":\"tree\",\"k\":{i}}},\"score\":0.25}}";
        var jsonDefects = new[]
        {
            "{", "[]", "\"look\"", "42", "{\"score\":0.1}", "{\"configuration\":3,\"score\":0.1}", "{\"configuration\":{\"k\":1},\"score\":0.1,\"predictions\":\"p.csv\"}",
            "{\"configuration\":{\"k\":1}}", "{\"configuration\":{\"k\":1},\"score\":\"0.1\"}", "{\"configuration\":{\"k\":1},\"score\":NaN}",
            "{\"configuration\":{\"k\":1},\"score\":Infinity}", "{\"configuration\":{\"k\":1},\"score\":1e999}", "{\"configuration\":{\"k\":1},\"score\":-0.5}",
            "{\"configuration\":{\"k\":1},\"score\":1.5}", "{\"configuration\":{\"k\":1},\"score\":null}", "{\"configuration\":{\"k\":1},\"predictions\":\"\"}",
            "{\"configuration\":{\"k\":1},\"predictions\":\"missing.csv\"}", $"{{\"configuration\":{{\"k\":1}},\"predictions\":\"{Path.GetFileName(badPredictionsFile)}\"}}",
            "{\"configuration\":{\"k\":1,\"k\":2},\"score\":0.1}", "{\"configuration\":\"{not json\",\"score\":0.1}", "{\"configuration\":{\"k\":1},\"score\":0.1}}",
            "{\"configuration\":{\"k\":1},\"score\":0.1,}",
        };
        foreach (var eol in LineEnds)
        {
            foreach (var defect in jsonDefects)
            {
                foreach (var at in new[] { 1, 15, 30 })
                {
                    var lines = Enumerable.Range(1, 30).Select(Line).ToArray();
                    lines[at - 1] = defect;
                    yield return new Case("import JSON Lines", $"{Shorten(defect)} on line {at} ({Name(eol)})", ["import", "validation", File(string.Join(eol, lines) + eol, ".jsonl")], 3);
                }
            }

            // A file cut inside its last line: the first four looks are whole, the fifth is not, so nothing is imported.
            var five = string.Join(eol, Enumerable.Range(1, 5).Select(Line));
            var start = five.Length - Line(5).Length;
            for (var k = start + 1; k < five.Length; k += 2)
            {
                yield return new Case("import JSON Lines", $"cut at {k} inside the last line ({Name(eol)})", ["import", "validation", File(five[..k], ".jsonl")], 3);
            }

            yield return new Case("import JSON Lines", $"empty file ({Name(eol)})", ["import", "validation", File(eol + eol, ".jsonl")], 3);
        }

        // Imports (CSV with a score column).
        var csv = "trainer,leaves,score\n" + string.Concat(Enumerable.Range(1, 20).Select(i => $"tree,{i},0.{i:00}\n"));
        var csvDefects = new List<(string What, string Text)>
        {
            ("empty file", ""),
            ("header only", "trainer,leaves,score\n"),
            ("no score column", csv.Replace("trainer,leaves,score", "trainer,leaves,loss", StringComparison.Ordinal)),
            ("duplicate score column", csv.Replace("trainer,leaves,score", "trainer,score,score", StringComparison.Ordinal)),
        };
        foreach (var row in new[] { 1, 10, 20 })
        {
            foreach (var score in new[] { "NaN", "inf", "-Infinity", "∞", "1e999", "", "abc", "1.5", "-0.1", "0,5" })
            {
                csvDefects.Add(($"score '{score}' on row {row}", WithRow(csv, row, $"tree,{row},\"{score}\"")));
            }

            csvDefects.Add(($"extra field on row {row}", WithRow(csv, row, $"tree,{row},0.1,x")));
            csvDefects.Add(($"missing field on row {row}", WithRow(csv, row, $"tree,0.1")));
            csvDefects.Add(($"unclosed quote on row {row}", WithRow(csv, row, $"\"tree,{row},0.1")));
        }

        foreach (var eol in LineEnds)
        {
            foreach (var (what, text) in csvDefects)
            {
                yield return new Case("import CSV", $"{what} ({Name(eol)})", ["import", "validation", File(Eol(text, eol))], 3);
            }
        }

        // A search's data file broken deep inside: every defect fails the first pass over the file, so nothing is written,
        // not even the holdout. Cut inside its last row (a copy cut short), and one defect on row 1,500 of 2,000.
        var data = SearchData(2000);
        string[] Search(string file, params string[] extra) => ["search", file, "--label", "y", "--task", "binary", "--looks", "1", "--quiet", .. extra];
        foreach (var eol in LineEnds)
        {
            var text = Eol(data, eol);
            var lastRow = text.LastIndexOf(eol, text.Length - eol.Length - 1, StringComparison.Ordinal) + eol.Length;
            for (var k = lastRow + 1; k < text.Length - eol.Length; k++)
            {
                yield return new Case("search data", $"cut at {k} inside the last row ({Name(eol)})", Search(File(text[..k])), 3);
            }

            foreach (var (what, replacement) in new[]
            {
                ("an extra field", "d1499,0.5,Mon,yes,surplus"), ("a missing field", "d1499,0.5,yes"), ("a quote inside a field", "d1499,0.\"5,Mon,yes"),
                ("text after a closing quote", "d1499,\"0.5\"x,Mon,yes"), ("a quote left open", "d1499,\"0.5,Mon,yes"), ("a NUL", "d1499,0.5,Mo\0n,yes"),
                ("no label", "d1499,0.5,Mon,"), ("a label of NA", "d1499,0.5,Mon,NA"),
            })
            {
                yield return new Case("search data", $"{what} on row 1500 ({Name(eol)})", Search(File(Eol(WithRow(data, 1500, replacement), eol))), 3);
            }

            var latin = Encoding.UTF8.GetBytes(Eol(WithRow(data, 1500, "d1499,0.5,MonX,yes"), eol));
            latin[Array.LastIndexOf(latin, (byte)'X')] = 0xE9; // Latin-1 é: not UTF-8
            yield return new Case("search data", $"a byte that is not UTF-8 on row 1500 ({Name(eol)})", Search(File(latin)), 3);
            yield return new Case("search data", $"text in a numeric column of --validation on row 1500 ({Name(eol)})",
                Search(File(text), "--validation", File(Eol(WithRow(data, 1500, "d1499,warm,Mon,yes"), eol))), 3);
        }

        yield return new Case("search data", "--finish without --share", Search(File(data), "--finish"), 2);
        yield return new Case("search data", "--finish of a shared search the ledger does not have", Search(File(data), "--finish", "--share", "nobody"), 2);

        // Names: the argument itself is wrong (too long, empty, control characters), so these are bad arguments.
        foreach (var name in new[] { new string('n', 201), new string('n', 100_000), "", "   ", "a\nb", "a\tb", "a\0b", "\u001b[31mred" })
        {
            yield return new Case("names", $"holdout name {Shorten(name)}", ["holdout", "add", name, "--labels", File(GoodLabels)], 2);
            yield return new Case("names", $"search label {Shorten(name)}", ["record", "validation", "--configuration", "{\"k\":1}", "--score", "0.1", "--search", name], 2);
        }
    }

    [Fact]
    public void A_thousand_malformed_inputs_each_end_in_one_clear_error_and_write_nothing()
    {
        Assert.Equal(0, _cli.Run("init").Exit);
        Assert.Equal(0, _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(Examples)).Exit);
        Assert.Equal(0, _cli.Run("record", "validation", "--configuration", "{\"k\":0}", "--predictions", File(GoodPredictions)).Exit);
        Assert.Equal(0, _cli.Run("holdout", "add", "regression", "--labels", _cli.Labels(Examples, "numeric.csv"), "--metric", "absolute-error", "--loss-range", "0,10").Exit);
        string Head()
        {
            using var book = Bookkeeper.Open(_cli.Ledger);
            return book.Store.ChainHead()!;
        }

        var head = Head();
        var failures = new List<string>();
        var families = new Dictionary<string, int>();
        var timer = Stopwatch.StartNew();
        var cases = 0;
        foreach (var c in Corpus())
        {
            cases++;
            families[c.Family] = families.GetValueOrDefault(c.Family) + 1;
            CliHarness.Result result;
            try
            {
                result = _cli.Run(c.Args);
            }
            catch (Exception e)
            {
                failures.Add($"{c.Family}: {c.What}: unhandled {e.GetType().Name}: {e.Message}");
                continue;
            }

            var lines = result.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries);
            if (result.Exit != c.Expected) failures.Add($"{c.Family}: {c.What}: exit {result.Exit}, expected {c.Expected}: {Shorten(result.Err, 300)}");
            else if (lines.Length != 1 || !lines[0].StartsWith("accountant: ", StringComparison.Ordinal)) failures.Add($"{c.Family}: {c.What}: stderr is not one 'accountant:' line: {Shorten(result.Err, 300)}");
            else if (result.Out.Length > 0) failures.Add($"{c.Family}: {c.What}: wrote to stdout: {Shorten(result.Out, 200)}");

            var now = Head();
            if (now != head)
            {
                failures.Add($"{c.Family}: {c.What}: the ledger changed");
                head = now;
            }
        }

        timer.Stop();
        output.WriteLine($"{cases} malformed inputs in {timer.Elapsed.TotalSeconds:0.0} s: {string.Join(", ", families.Select(f => $"{f.Key} {f.Value}"))}; {failures.Count} failed.");
        foreach (var failure in failures.Take(40)) output.WriteLine(failure);
        Assert.True(cases >= 1000, $"only {cases} cases");
        Assert.Empty(failures);
        using var final = Bookkeeper.Open(_cli.Ledger);
        Assert.True(final.Verify().Valid);
        Assert.Single(final.Store.Looks(final.Holdout("validation")));
        Assert.Equal(["regression", "validation"], final.Store.Holdouts().Select(h => h.Name).Order());
    }

    /// <summary>A search's data: an id, a number, a weekday and a yes/no label, invented.</summary>
    private static string SearchData(int rows) =>
        "id,x,day,y\n" + string.Concat(Enumerable.Range(0, rows).Select(i => $"d{i},{(i * 37 % 1000 / 1000.0).ToString("0.000", System.Globalization.CultureInfo.InvariantCulture)},{new[] { "Mon", "Tue", "Wed" }[i % 3]},{(i % 7 < 3 ? "yes" : "no")}\n"));

    private static string Name(string eol) => eol switch { "\n" => "LF", "\r\n" => "CRLF", _ => "CR" };

    private static string Shorten(string text, int length = 40)
    {
        var flat = text.Replace("\n", "\\n", StringComparison.Ordinal).Replace("\r", "\\r", StringComparison.Ordinal).Replace("\0", "\\0", StringComparison.Ordinal);
        return flat.Length <= length ? flat : flat[..length] + "...";
    }
}
