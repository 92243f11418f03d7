using System.Globalization;
using System.Text.Json;

namespace Accountant.Cli.Tests;

/// <summary>The winner test, <c>compare</c> and the bootstrap estimates through the command line.</summary>
public sealed class CompareAndEstimatesTests : IDisposable
{
    private const int N = 100;
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    /// <summary>Predictions for the harness's labels (e1..eN, label i % 2) that are wrong exactly on the given ids.</summary>
    private string Wrong(string file, Func<int, bool> wrong) =>
        _cli.Write(file, "id,prediction\n" + string.Concat(Enumerable.Range(1, N).Select(i => $"e{i},{(wrong(i) ? 1 - i % 2 : i % 2)}\n")));

    /// <summary>
    /// Look 1 errs on e1..e14, look 2 on e13..e16, look 3 on e13..e17, look 4 only has a score. Look 2 is the best;
    /// against look 1 it is the Armitage &amp; Berry worked example: 12 examples only look 1 gets wrong, 2 only look 2.
    /// </summary>
    private void Setup()
    {
        Assert.Equal(ExitCodes.Success, _cli.Run("init").Exit);
        Assert.Equal(ExitCodes.Success, _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(N)).Exit);
        Record("""{"look":1}""", Wrong("p1.csv", i => i <= 14));
        Record("""{"look":2}""", Wrong("p2.csv", i => i is >= 13 and <= 16));
        Record("""{"look":3}""", Wrong("p3.csv", i => i is >= 13 and <= 17));
        Assert.Equal(ExitCodes.Success, _cli.Run("record", "validation", "--configuration", """{"look":4}""", "--score", "0.3").Exit);
    }

    private void Record(string configuration, string predictions) =>
        Assert.Equal(ExitCodes.Success, _cli.Run("record", "validation", "--configuration", configuration, "--predictions", predictions).Exit);

    private string Head() => JsonDocument.Parse(_cli.Run("verify", "--format", "json").Out).RootElement.GetProperty("chainHead").GetString() ?? "";

    [Fact]
    public void Compare_json_carries_the_discordant_counts_and_the_published_p_values()
    {
        Setup();
        var result = _cli.Run("compare", "validation", "1", "best", "--format", "json");
        Assert.Equal(ExitCodes.Success, result.Exit);
        var json = JsonDocument.Parse(result.Out).RootElement;
        Assert.Equal(1, json.GetProperty("schemaVersion").GetInt32());
        Assert.Equal(12, json.GetProperty("onlyA").GetInt32());
        Assert.Equal(2, json.GetProperty("onlyB").GetInt32());
        // Armitage & Berry, Statistical Methods in Medical Research: b = 12, c = 2 → exact p = 0.0129, corrected p = 0.0162.
        Assert.Equal(0.0129, json.GetProperty("pValue").GetDouble(), 4);
        Assert.Equal(0.0162, json.GetProperty("pValueCorrected").GetDouble(), 4);
        Assert.True(json.GetProperty("selectedOnThisHoldout").GetBoolean());
        Assert.Equal(2, json.GetProperty("lookB").GetProperty("look").GetInt32());

        var table = _cli.Run("compare", "validation", "best", "runner-up");
        Assert.Equal(ExitCodes.Success, table.Exit);
        Assert.Contains("#2 (best)", table.Out);
        Assert.Contains("#3", table.Out);
        Assert.Contains("not distinguishable", table.Out);
    }

    [Theory]
    [InlineData(new[] { "compare", "validation", "1", "9" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "compare", "validation", "1", "4" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "compare", "validation", "2", "best" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "compare", "validation", "1", "second" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "compare", "nowhere", "1", "2" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "compare", "validation", "1", "2", "--confidence", "2" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "statement", "validation", "--estimates", "--resamples", "5" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "statement", "validation", "--estimates", "--seed", "-1" }, ExitCodes.BadArguments)]
    public void Errors_are_one_line_with_a_distinct_exit_code_and_write_nothing(string[] args, int expected)
    {
        Setup();
        var head = Head();
        var result = _cli.Run(args);
        Assert.Equal(expected, result.Exit);
        Assert.Single(result.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries));
        Assert.StartsWith("accountant: ", result.Err);
        Assert.Equal(head, Head());
    }

    [Fact]
    public void Estimates_and_the_winner_test_need_zero_one_losses()
    {
        Assert.Equal(ExitCodes.Success, _cli.Run("init").Exit);
        var labels = _cli.Write("y.csv", "id,label\na,1.5\nb,2\n");
        Assert.Equal(ExitCodes.Success, _cli.Run("holdout", "add", "r", "--labels", labels, "--metric", "squared-error", "--loss-range", "0,10").Exit);
        var result = _cli.Run("statement", "r", "--winner");
        Assert.Equal(ExitCodes.BadArguments, result.Exit);
        Assert.Contains("0/1 losses", result.Err);
    }

    [Fact]
    public void Statement_reports_estimates_and_the_winner_test_only_when_asked()
    {
        Setup();
        var plain = JsonDocument.Parse(_cli.Run("statement", "validation", "--format", "json").Out).RootElement;
        Assert.Equal(0, plain.GetProperty("estimates").GetArrayLength());
        Assert.Equal(JsonValueKind.Null, plain.GetProperty("winner").ValueKind);

        var run = _cli.Run("statement", "validation", "--estimates", "--winner", "--format", "json", "--seed", "7", "--resamples", "400");
        Assert.Equal(ExitCodes.Success, run.Exit);
        var json = JsonDocument.Parse(run.Out).RootElement;
        var estimates = json.GetProperty("estimates").EnumerateArray().ToDictionary(e => e.GetProperty("method").GetString()!);
        Assert.Equal(["bootstrap-bias", "max-bootstrap"], estimates.Keys.Order());
        foreach (var e in estimates.Values)
        {
            Assert.False(e.GetProperty("guarantee").GetBoolean());
            Assert.Equal(400, e.GetProperty("resamples").GetInt32());
            Assert.Equal(7UL, e.GetProperty("seed").GetUInt64());
            Assert.Equal(3, e.GetProperty("looks").GetInt32());
            Assert.InRange(e.GetProperty("bound").GetDouble(), 0.04, 1.0);
        }

        Assert.True(estimates["max-bootstrap"].GetProperty("asymptotic").GetBoolean());
        Assert.Contains("1 of 4 looks carry only a score", json.GetProperty("estimatesNote").GetString());

        // The winner: look 2 (4 errors) against the runner-up look 3 (5 errors, one discordant example): tied.
        var winner = json.GetProperty("winner");
        Assert.Equal(2, winner.GetProperty("best").GetInt32());
        Assert.Equal(3, winner.GetProperty("runnerUp").GetProperty("look").GetInt32());
        Assert.Equal(0, winner.GetProperty("runnerUp").GetProperty("onlyBest").GetInt32());
        Assert.Equal(1, winner.GetProperty("runnerUp").GetProperty("onlyRunnerUp").GetInt32());
        Assert.Equal([2, 3], winner.GetProperty("tiedWithBest").EnumerateArray().Select(x => x.GetInt32()));
        Assert.Contains(json.GetProperty("warnings").EnumerateArray(), w => w.GetProperty("code").GetString() == "winner-tie");

        // The same seed reproduces the estimates; another seed draws other resamples.
        var again = _cli.Run("statement", "validation", "--estimates", "--format", "json", "--seed", "7", "--resamples", "400").Out;
        var other = _cli.Run("statement", "validation", "--estimates", "--format", "json", "--seed", "8", "--resamples", "400").Out;
        string Estimates(string text) => JsonDocument.Parse(text).RootElement.GetProperty("estimates").ToString();
        Assert.Equal(Estimates(run.Out), Estimates(again));
        Assert.NotEqual(Estimates(run.Out), Estimates(other));

        var table = _cli.Run("statement", "validation", "--estimates", "--winner").Out;
        Assert.Contains("Estimates, not guarantees", table);
        Assert.Contains("estimate, asymptotic", table);
        Assert.Contains("Winner test", table);
        Assert.Contains("selected on this holdout", table);
        var markdown = _cli.Run("statement", "validation", "--estimates", "--winner", "--format", "markdown").Out;
        Assert.Contains("| max-bootstrap |", markdown);
    }

    [Fact]
    public void Estimates_are_printed_culture_invariant()
    {
        Setup();
        var saved = CultureInfo.CurrentCulture;
        CultureInfo.CurrentCulture = new CultureInfo("de-DE");
        try
        {
            var table = _cli.Run("statement", "validation", "--estimates", "--winner").Out;
            Assert.Matches(@"max-bootstrap\s+0\.\d{4}", table);
            Assert.DoesNotMatch(@"0,\d{4}", table);
        }
        finally
        {
            CultureInfo.CurrentCulture = saved;
        }
    }

    [Fact]
    public void Version_prints_the_version()
    {
        var result = _cli.RunRaw(["--version"]);
        Assert.Equal(ExitCodes.Success, result.Exit);
        Assert.StartsWith("0.1.0", result.Out.Trim());
        Assert.EndsWith($"(ledger schema {Accountant.Ledger.SqliteLedgerStore.SchemaVersion})", result.Out.Trim());
    }
}
