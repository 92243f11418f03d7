using System.Diagnostics;
using System.Globalization;
using System.Text.Json;
using System.Text.RegularExpressions;
using Accountant.Ledger;

namespace Accountant.Cli.Tests;

/// <summary>Statements people paste: Markdown and LaTeX against checked-in files, and the HTML report rendered in a browser.</summary>
public sealed partial class ReportTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    private sealed class Clock : TimeProvider
    {
        private DateTimeOffset _now = new(2026, 3, 4, 5, 6, 7, TimeSpan.Zero);

        public override DateTimeOffset GetUtcNow() => _now = _now.AddSeconds(1);
    }

    /// <summary>A fixed ledger: 400 examples, ten looks with predictions wrong on 40–130 examples, one voided; a name with _ and %.</summary>
    private const string Name = "night_shift%v2";

    private void FixedLedger()
    {
        using var book = Bookkeeper.Create(_cli.Ledger, new Clock());
        var examples = Enumerable.Range(1, 400).Select(i => new HoldoutExample($"n{i:000}", (i % 3 == 0 ? 1 : 0).ToString(CultureInfo.InvariantCulture))).ToList();
        book.RegisterHoldout(Name, examples);
        for (var look = 0; look < 10; look++)
        {
            var wrong = 40 + 10 * ((look * 7) % 10);
            var predictions = examples.Select((e, i) => new Prediction(e.Id, i < wrong ? (e.Label == "1" ? "0" : "1") : e.Label)).ToList();
            book.Record(Name, $"{{\"trainer\":\"tree_{look}\",\"depth\":{look + 2}}}", predictions, search: "grid");
        }

        book.Void(Name, 10, "scored on the wrong split");
    }

    private static string ExpectedPath(string file) => Path.Combine(AppContext.BaseDirectory, "Expected", file);

    private static string SourceFolder([System.Runtime.CompilerServices.CallerFilePath] string path = "") => Path.GetDirectoryName(path)!;

    [Theory]
    [InlineData("markdown", "statement.md")]
    [InlineData("latex", "statement.tex")]
    public void Statements_for_a_fixed_ledger_match_the_checked_in_files(string format, string file)
    {
        FixedLedger();
        var result = _cli.Run("statement", Name, "--format", format);
        Assert.Equal(ExitCodes.Success, result.Exit);
        if (Environment.GetEnvironmentVariable("ACCOUNTANT_WRITE_EXPECTED") == "1")
        {
            // Regenerate after a deliberate change of format, then read the diff before committing it.
            File.WriteAllText(Path.Combine(SourceFolder(), "Expected", file), result.Out);
        }

        Assert.Equal(File.ReadAllText(ExpectedPath(file)).ReplaceLineEndings(), result.Out.ReplaceLineEndings());
    }

    [Fact]
    public void The_latex_is_well_formed_without_a_tex_installation()
    {
        FixedLedger();
        var tex = _cli.Run("statement", Name, "--format", "latex").Out;
        var body = string.Join('\n', tex.Split('\n').Where(line => !line.StartsWith('%')));
        // Braces balance once escaped braces are set aside.
        var bare = body.Replace(@"\{", "").Replace(@"\}", "");
        var depth = 0;
        foreach (var c in bare)
        {
            depth += c == '{' ? 1 : c == '}' ? -1 : 0;
            Assert.True(depth >= 0, "a closing brace without an opening one");
        }

        Assert.Equal(0, depth);
        // Every underscore and percent sign in the text is escaped (LaTeX reads a bare % as a comment, _ as a subscript).
        Assert.DoesNotMatch(@"(?<!\\)[_%]", Regex.Replace(body, @"\$[^$]*\$", ""));
        Assert.Contains(@"night\_shift\%v2", body);
        Assert.Equal(body.Split(@"\begin{").Length, body.Split(@"\end{").Length);
    }

    [Fact]
    public async Task The_html_report_carries_the_json_statements_numbers_and_renders_in_headless_chromium()
    {
        FixedLedger();
        var html = Path.Combine(_cli.Folder, "report.html");
        Assert.Equal(ExitCodes.Success, _cli.Run("report", Name, "--out", html).Exit);
        var page = File.ReadAllText(html);
        var json = JsonDocument.Parse(_cli.Run("statement", Name, "--format", "json").Out).RootElement;

        string Field(string name) => WebUtilityDecode(Regex.Match(page, $"data-field=\"{Regex.Escape(name)}\">([^<]*)<").Groups[1].Value);
        string N(double x) => x.ToString("F4", CultureInfo.InvariantCulture);
        Assert.Equal(json.GetProperty("holdout").GetProperty("name").GetString(), Field("holdout.name"));
        Assert.Equal(json.GetProperty("holdout").GetProperty("size").GetInt32().ToString(CultureInfo.InvariantCulture), Field("holdout.size"));
        Assert.Equal(json.GetProperty("looks").GetInt32().ToString(CultureInfo.InvariantCulture), Field("looks"));
        Assert.Equal(json.GetProperty("best").GetProperty("look").GetInt32().ToString(CultureInfo.InvariantCulture), Field("best.look"));
        Assert.Equal(N(json.GetProperty("best").GetProperty("observed").GetDouble()), Field("best.observed"));
        var bounds = json.GetProperty("bounds").EnumerateArray().ToList();
        for (var i = 0; i < bounds.Count; i++)
        {
            Assert.Equal(N(bounds[i].GetProperty("bound").GetDouble()), Field($"bounds[{i}].bound"));
            Assert.Equal(N(bounds[i].GetProperty("margin").GetDouble()), Field($"bounds[{i}].margin"));
        }

        Assert.Equal(json.GetProperty("chainHead").GetString(), Field("chainHead"));
        Assert.DoesNotContain("<script", page, StringComparison.OrdinalIgnoreCase);
        Assert.DoesNotMatch("(src|href)=\"(https?:)?//", page);
        Assert.Contains("<svg", page);
        Assert.Contains("Tied with the best", page);

        // Rendered in Debian's Chromium (installed by .ci/run), headless, with a fresh profile.
        var chromium = File.Exists("/usr/bin/chromium") ? "/usr/bin/chromium" : throw new FileNotFoundException("Chromium is not installed; .ci/run installs Debian's chromium package for this test.");
        var shot = Path.Combine(_cli.Folder, "report.png");
        var profile = Path.Combine(_cli.Folder, "profile");
        var start = new ProcessStartInfo(chromium)
        {
            RedirectStandardError = true,
            RedirectStandardOutput = true,
            UseShellExecute = false,
        };
        foreach (var argument in new[] { "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
                     "--disable-component-update", "--disable-sync", "--enable-logging=stderr", "--v=0", $"--user-data-dir={profile}", "--window-size=420,1800",
                     $"--screenshot={shot}", new Uri(html).AbsoluteUri })
        {
            start.ArgumentList.Add(argument);
        }

        using var process = Process.Start(start)!;
        var stderrTask = process.StandardError.ReadToEndAsync();
        await process.StandardOutput.ReadToEndAsync();
        using var timeout = new CancellationTokenSource(TimeSpan.FromSeconds(90));
        await process.WaitForExitAsync(timeout.Token);
        var stderr = await stderrTask;
        Assert.True(File.Exists(shot), "no screenshot: " + stderr);
        // The page has no script; any console message would be an error of the page itself.
        Assert.DoesNotMatch(@"CONSOLE\(\d+\)", stderr);

        // Not blank: a phone-width screenshot with text, a table and a plot has many colours and plenty of ink.
        using var bitmap = SkiaSharp.SKBitmap.Decode(shot);
        Assert.Equal(420, bitmap.Width);
        var colours = new HashSet<uint>();
        var ink = 0;
        for (var y = 0; y < bitmap.Height; y += 3)
        for (var x = 0; x < bitmap.Width; x += 3)
        {
            var pixel = bitmap.GetPixel(x, y);
            colours.Add((uint)pixel);
            if (pixel.Red + pixel.Green + pixel.Blue < 600) ink++;
        }

        Assert.True(colours.Count > 50, $"only {colours.Count} colours in the screenshot");
        Assert.True(ink > 2000, $"only {ink} dark pixels in the screenshot");
    }

    private static string WebUtilityDecode(string text) => System.Net.WebUtility.HtmlDecode(text);
}
