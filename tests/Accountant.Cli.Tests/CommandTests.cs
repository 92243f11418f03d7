using System.Globalization;
using System.Text.Json;
using Microsoft.Data.Sqlite;

namespace Accountant.Cli.Tests;

public sealed class CommandTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    private void Init(int n = 100)
    {
        Assert.Equal(ExitCodes.Success, _cli.Run("init").Exit);
        var add = _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(n));
        Assert.Equal(ExitCodes.Success, add.Exit);
        Assert.Contains(n.ToString("#,0", CultureInfo.InvariantCulture) + " examples", add.Out);
    }

    private string Head() => JsonDocument.Parse(_cli.Run("verify", "--format", "json").Out).RootElement.GetProperty("chainHead").GetString() ?? "";

    [Fact]
    public void Record_prints_the_look_number_and_observed_score()
    {
        Init();
        var first = _cli.Run("record", "validation", "--configuration", """{"trainer":"a"}""", "--predictions", _cli.Predictions(100, 7, "p1.csv"));
        Assert.Equal(ExitCodes.Success, first.Exit);
        Assert.Equal("look 1 on holdout 'validation': error 0.0700", first.Out.Trim());
        var second = _cli.Run("record", "validation", "--configuration", _cli.Write("c.json", """{"trainer":"b"}""").Insert(0, "@"), "--score", "0.05");
        Assert.Contains("look 2", second.Out);
        Assert.Contains("score only", second.Out);
        var show = _cli.Run("holdout", "show", "validation");
        Assert.Contains("#1", show.Out);
        Assert.Contains("""{"trainer":"b"}""", show.Out);
        Assert.Contains("validation", _cli.Run("holdout", "list").Out);
    }

    [Theory]
    [InlineData(new[] { "record", "validation", "--configuration", "{}" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "record", "validation", "--configuration", "{}", "--score", "0.1", "--predictions", "x.csv" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "record", "validation", "--configuration", "{}", "--score", "NaN" }, ExitCodes.BadInput)]
    [InlineData(new[] { "record", "validation", "--configuration", "{}", "--score", "1.2" }, ExitCodes.BadInput)]
    [InlineData(new[] { "record", "validation", "--configuration", "{}", "--score", "abc" }, ExitCodes.BadInput)]
    [InlineData(new[] { "record", "validation", "--configuration", "{oops", "--score", "0.1" }, ExitCodes.BadInput)]
    [InlineData(new[] { "record", "nowhere", "--configuration", "{}", "--score", "0.1" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "record", "validation", "--configuration", "{}", "--predictions", "missing.csv" }, ExitCodes.BadInput)]
    [InlineData(new[] { "record", "validation", "--confguration", "{}" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "statement", "validation", "--confidence", "1.5" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "statement", "validation", "--format", "xml" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "void", "validation", "9", "--reason", "x" }, ExitCodes.BadArguments)]
    [InlineData(new[] { "init" }, ExitCodes.LedgerUnusable)]
    public void Errors_are_one_line_with_a_distinct_exit_code_and_write_nothing(string[] args, int expected)
    {
        Init();
        var head = Head();
        var result = _cli.Run(args);
        Assert.Equal(expected, result.Exit);
        Assert.Single(result.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries));
        Assert.StartsWith("accountant: ", result.Err);
        Assert.Equal(head, Head());
    }

    [Fact]
    public void Predictions_for_another_holdout_are_refused_with_nothing_written()
    {
        Init();
        var head = Head();
        var missing = _cli.Run("record", "validation", "--configuration", "{}", "--predictions", _cli.Predictions(99, 0, "short.csv"));
        Assert.Equal(ExitCodes.BadInput, missing.Exit);
        Assert.Contains("miss 1", missing.Err);
        var extra = _cli.Run("record", "validation", "--configuration", "{}", "--predictions", _cli.Predictions(101, 0, "long.csv"));
        Assert.Equal(ExitCodes.BadInput, extra.Exit);
        Assert.Contains("'e101'", extra.Err);
        var labelled = _cli.Write("labelled.csv", "id,prediction,label\n" + string.Concat(Enumerable.Range(1, 100).Select(i => $"e{i},0,{(i == 50 ? 1 - i % 2 : i % 2)}\n")));
        var wrongLabel = _cli.Run("record", "validation", "--configuration", "{}", "--predictions", labelled);
        Assert.Equal(ExitCodes.BadInput, wrongLabel.Exit);
        Assert.Contains("different holdout", wrongLabel.Err);
        Assert.Equal(head, Head());
    }

    [Fact]
    public void Import_takes_json_lines_with_scores_and_prediction_files()
    {
        Init();
        _cli.Predictions(100, 10, "a.csv");
        var file = _cli.Write("looks.jsonl", """
            {"configuration":{"leaves":8},"score":0.2}
            {"configuration":{"leaves":16},"predictions":"a.csv","stage":"full"}

            {"configuration":"{\"leaves\":32}","score":0.15,"search":"grid-1"}
            """);
        var result = _cli.Run("import", "validation", file);
        Assert.Equal(ExitCodes.Success, result.Exit);
        Assert.Contains("imported 3 look(s)", result.Out);
        Assert.Contains("numbers 1–3", result.Out);
        var statement = JsonDocument.Parse(_cli.Run("statement", "validation", "--format", "json").Out).RootElement;
        Assert.Equal(3, statement.GetProperty("looks").GetInt32());
        Assert.Equal(2, statement.GetProperty("best").GetProperty("look").GetInt32());
        Assert.Equal(2, statement.GetProperty("scoreOnlyLooks").GetInt32());
    }

    [Fact]
    public void Import_of_csv_treats_every_other_column_as_a_hyperparameter()
    {
        Init();
        var file = _cli.Write("grid.csv", "trainer,leaves,score\nfasttree,8,0.2\n\"fast,tree\",16,0.1\n");
        Assert.Equal(ExitCodes.Success, _cli.Run("import", "validation", file).Exit);
        var show = JsonDocument.Parse(_cli.Run("holdout", "show", "validation", "--format", "json").Out).RootElement;
        var second = show.GetProperty("looks")[1].GetProperty("configuration");
        Assert.Equal("fast,tree", second.GetProperty("trainer").GetString());
        Assert.Equal(16, second.GetProperty("leaves").GetInt32());
    }

    [Theory]
    [InlineData("{\"configuration\":{},\"score\":0.1}\n{\"configuration\":{},\"score\":\"0.2\"}\n", "line 2")]
    [InlineData("{\"configuration\":{},\"score\":0.1}\n{\"configuration\":{},\"score\":0.1}\nnot json\n", "line 3")]
    [InlineData("{\"configuration\":{},\"score\":0.1}\n{\"configuration\":{},\"score\":7}\n", "line 2")]
    [InlineData("{\"configuration\":{},\"score\":0.1,\"predictions\":\"a.csv\"}\n", "line 1")]
    [InlineData("{\"score\":0.1}\n", "line 1")]
    [InlineData("{\"configuration\":{},\"predictions\":\"nope.csv\"}\n", "line 1")]
    public void An_import_with_one_bad_line_imports_nothing_and_names_the_line(string content, string where)
    {
        Init();
        var head = Head();
        var result = _cli.Run("import", "validation", _cli.Write("bad.jsonl", content));
        Assert.Equal(ExitCodes.BadInput, result.Exit);
        Assert.Contains(where, result.Err);
        Assert.Contains("Nothing was", result.Err);
        Assert.Equal(head, Head());
    }

    [Fact]
    public void Statement_json_carries_the_fields_other_tools_rely_on_with_the_check_values()
    {
        Init(1000);
        // Ten looks, best error 0.10 on n = 1000: binomial-union 0.1269 (SciPy 1.10.1), hoeffding-union 0.1515 (DESIGN.md check values).
        var lines = string.Concat(new[] { 0.2, 0.15, 0.1, 0.3, 0.12, 0.11, 0.5, 0.4, 0.13, 0.14 }.Select((s, i) => $"{{\"configuration\":{{\"i\":{i}}},\"score\":{s.ToString(CultureInfo.InvariantCulture)}}}\n"));
        Assert.Equal(ExitCodes.Success, _cli.Run("import", "validation", _cli.Write("ten.jsonl", lines)).Exit);
        var root = JsonDocument.Parse(_cli.Run("statement", "validation", "--format", "json").Out).RootElement;
        Assert.Equal(1, root.GetProperty("schemaVersion").GetInt32());
        Assert.Equal("validation", root.GetProperty("holdout").GetProperty("name").GetString());
        Assert.Equal(1000, root.GetProperty("holdout").GetProperty("size").GetInt32());
        Assert.Equal(10, root.GetProperty("looks").GetInt32());
        Assert.Equal(0, root.GetProperty("adaptiveLooks").GetInt32());
        Assert.Equal(3, root.GetProperty("best").GetProperty("look").GetInt32());
        Assert.Equal(0.1, root.GetProperty("best").GetProperty("observed").GetDouble());
        var bounds = root.GetProperty("bounds").EnumerateArray().ToList();
        Assert.Equal("binomial-union", bounds[0].GetProperty("method").GetString());
        Assert.Equal(0.1269, bounds[0].GetProperty("bound").GetDouble(), 4);
        Assert.Equal(0.0269, bounds[0].GetProperty("margin").GetDouble(), 4);
        Assert.True(bounds[0].GetProperty("guarantee").GetBoolean());
        Assert.Equal(0.1515, bounds.Single(b => b.GetProperty("method").GetString() == "hoeffding-union").GetProperty("bound").GetDouble(), 4);
        Assert.Equal(0.02, root.GetProperty("budget").GetProperty("tolerance").GetDouble());
        Assert.True(root.GetProperty("budget").GetProperty("looksLeft").GetInt64() >= 0);
        Assert.Equal(64, root.GetProperty("chainHead").GetString()!.Length);
        var warning = root.GetProperty("warnings")[0];
        Assert.False(string.IsNullOrEmpty(warning.GetProperty("code").GetString()));
        Assert.False(string.IsNullOrEmpty(warning.GetProperty("message").GetString()));
        Assert.Equal(5, root.GetProperty("cautions").GetArrayLength());

        var markdown = _cli.Run("statement", "validation", "--format", "markdown").Out;
        Assert.Contains("| **binomial-union** | 0.1269 |", markdown);
    }

    [Fact]
    public void Numbers_are_culture_invariant_under_a_comma_decimal_culture()
    {
        Init(1000);
        _cli.Run("record", "validation", "--configuration", "{}", "--score", "0.1");
        var saved = CultureInfo.CurrentCulture;
        try
        {
            CultureInfo.CurrentCulture = CultureInfo.GetCultureInfo("de-DE");
            var table = _cli.Run("statement", "validation");
            Assert.Contains("0.1170", table.Out); // one look: the Langford/Clopper–Pearson bound 0.1170 (SciPy 1.10.1)
            Assert.DoesNotContain("0,1170", table.Out);
            var plan = _cli.Run("plan", "--looks", "1", "--tolerance", "0.05", "--two-sided", "--no-ledger");
            Assert.Contains("738", plan.Out);
        }
        finally
        {
            CultureInfo.CurrentCulture = saved;
        }
    }

    [Fact]
    public void Budget_strict_fails_the_gate_on_an_overused_holdout()
    {
        Init(100);
        var lines = string.Concat(Enumerable.Range(0, 30).Select(i => $"{{\"configuration\":{{\"i\":{i}}},\"score\":0.3}}\n"));
        _cli.Run("import", "validation", _cli.Write("many.jsonl", lines));
        var loose = _cli.Run("budget", "validation", "--tolerance", "0.5", "--strict");
        Assert.Equal(ExitCodes.Success, loose.Exit);
        var strict = _cli.Run("budget", "validation", "--tolerance", "0.05", "--strict");
        Assert.Equal(ExitCodes.GateFailed, strict.Exit);
        Assert.Contains("overused", strict.Err);
        Assert.Equal(ExitCodes.Success, _cli.Run("budget", "validation", "--tolerance", "0.05").Exit);
        var json = JsonDocument.Parse(_cli.Run("budget", "validation", "--tolerance", "0.05", "--format", "json").Out).RootElement;
        Assert.True(json.GetProperty("overused").GetBoolean());
        Assert.Equal(30, json.GetProperty("looksUsed").GetInt32());
    }

    [Fact]
    public void Plan_gives_the_published_hoeffding_sizes_and_the_exact_binomial_size()
    {
        // Hoeffding 1963; arithmetic: ε = δ = 0.05 → 738 two-sided, 600 one-sided; ε = 0.01 → 18,445 two-sided.
        Assert.Contains("738", _cli.Run("plan", "--looks", "1", "--tolerance", "0.05", "--two-sided").Out);
        Assert.Contains("600", _cli.Run("plan", "--looks", "1", "--tolerance", "0.05").Out);
        Assert.Contains("18,445", _cli.Run("plan", "--looks", "1", "--tolerance", "0.01", "--two-sided").Out);
        var json = JsonDocument.Parse(_cli.Run("plan", "--looks", "100", "--tolerance", "0.02", "--error", "0.1", "--format", "json").Out).RootElement;
        var plans = json.GetProperty("plans").EnumerateArray().ToList();
        Assert.True(plans[1].GetProperty("holdoutSize").GetInt64() < plans[0].GetProperty("holdoutSize").GetInt64());
        Assert.Equal(ExitCodes.BadArguments, _cli.Run("plan", "--looks", "0", "--tolerance", "0.05").Exit);
    }

    [Fact]
    public void Void_keeps_the_look_counted_and_verify_detects_tampering()
    {
        Init();
        _cli.Run("record", "validation", "--configuration", "{\"a\":1}", "--score", "0.01");
        _cli.Run("record", "validation", "--configuration", "{\"a\":2}", "--score", "0.2");
        var voided = _cli.Run("void", "validation", "1", "--reason", "leaked labels");
        Assert.Equal(ExitCodes.Success, voided.Exit);
        var statement = JsonDocument.Parse(_cli.Run("statement", "validation", "--format", "json").Out).RootElement;
        Assert.Equal(2, statement.GetProperty("looks").GetInt32());
        Assert.Equal(1, statement.GetProperty("voidedLooks").GetInt32());
        Assert.Equal(2, statement.GetProperty("best").GetProperty("look").GetInt32());
        var head = statement.GetProperty("chainHead").GetString()!;

        var ok = _cli.Run("verify", "--head", head);
        Assert.Equal(ExitCodes.Success, ok.Exit);
        Assert.Contains("chain valid: 4 entries", ok.Out);

        using (var connection = new SqliteConnection($"Data Source={_cli.Ledger};Pooling=False"))
        {
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = "DROP TRIGGER looks_no_update; UPDATE looks SET score = 0.001 WHERE number = 2;";
            command.ExecuteNonQuery();
        }

        var bad = _cli.Run("verify");
        Assert.Equal(ExitCodes.LedgerIntegrity, bad.Exit);
        Assert.Contains("entry 3", bad.Err);
    }

    [Fact]
    public void The_ledger_comes_from_the_option_then_the_environment_then_the_default()
    {
        var other = Path.Combine(_cli.Folder, "from-env.db");
        _cli.Variables["ACCOUNTANT_LEDGER"] = other;
        Assert.Equal(ExitCodes.Success, _cli.RunRaw(["init"]).Exit);
        Assert.True(File.Exists(other));
        var missing = _cli.RunRaw(["holdout", "list", "--ledger", Path.Combine(_cli.Folder, "none.db")]);
        Assert.Equal(ExitCodes.LedgerUnusable, missing.Exit);
        Assert.Contains("accountant init", missing.Err);
    }

    [Fact]
    public void A_newer_ledger_and_a_file_that_is_not_a_ledger_are_refused()
    {
        Init();
        using (var connection = new SqliteConnection($"Data Source={_cli.Ledger};Pooling=False"))
        {
            connection.Open();
            using var command = connection.CreateCommand();
            command.CommandText = "PRAGMA user_version = 7;";
            command.ExecuteNonQuery();
        }

        var newer = _cli.Run("statement", "validation");
        Assert.Equal(ExitCodes.LedgerUnusable, newer.Exit);
        Assert.Contains("schema version 7", newer.Err);
        var notLedger = _cli.Run("holdout", "list", "--ledger", _cli.Labels(3, "plain.csv"));
        Assert.Equal(ExitCodes.LedgerUnusable, notLedger.Exit);
    }

    [Fact]
    public void No_arguments_prints_where_to_start_and_help_has_an_example()
    {
        var intro = _cli.RunRaw([]);
        Assert.Equal(ExitCodes.Success, intro.Exit);
        Assert.Contains("accountant demo", intro.Out);
        Assert.Contains("accountant statement", intro.Out);
        foreach (var verb in new[] { "init", "record", "import", "statement", "budget", "plan", "void", "verify", "search", "unseal", "plot", "report", "compare", "simulate", "demo" })
        {
            Assert.Contains("Example: accountant " + verb, _cli.RunRaw([verb, "--help"]).Out);
        }
    }
}

public sealed class DemoCommandTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    [Fact]
    public void The_demo_runs_end_to_end_and_keeps_its_ledger_when_asked()
    {
        var result = _cli.Run("demo", "--looks", "5", "--training-rows", "400", "--validation-rows", "300", "--fresh-rows", "5000", "--format", "json");
        Assert.Equal(ExitCodes.Success, result.Exit);
        var root = System.Text.Json.JsonDocument.Parse(result.Out).RootElement;
        Assert.Equal(5, root.GetProperty("statement").GetProperty("looks").GetInt32());
        Assert.Equal(300, root.GetProperty("statement").GetProperty("holdout").GetProperty("size").GetInt32());
        Assert.Equal(5000, root.GetProperty("truth").GetProperty("freshRows").GetInt32());
        Assert.Contains("5/5 looks", result.Err); // progress on stderr
        var verify = _cli.Run("verify");
        Assert.Equal(ExitCodes.Success, verify.Exit);
        Assert.Equal(5, System.Text.Json.JsonDocument.Parse(_cli.Run("statement", "bakery-validation", "--format", "json").Out).RootElement.GetProperty("looks").GetInt32());

        var table = _cli.Run("demo", "--looks", "2", "--training-rows", "200", "--validation-rows", "300", "--fresh-rows", "2000", "--quiet");
        Assert.Equal(ExitCodes.Success, table.Exit);
        Assert.Contains("What only a simulation can show", table.Out);
        Assert.Contains("7 counted", table.Out); // the same holdout, now with 5 + 2 looks
        // The selected look is the first run's (trained on 400 days, not these 200), so no model of this run stands for it.
        var best = System.Text.Json.JsonDocument.Parse(_cli.Run("statement", "bakery-validation", "--format", "json").Out).RootElement.GetProperty("best").GetProperty("look").GetInt32();
        if (best <= 5) Assert.Contains($"the selected look #{best} was trained by an earlier run on this ledger, on other training days", table.Out);
        else Assert.Contains("its true error on 2,000 fresh days", table.Out);
        Assert.Equal("", table.Err);
    }
}

public sealed class AdaptiveCommandTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    [Fact]
    public void Record_with_a_guard_prints_the_released_value_and_the_statement_accounts_for_adaptivity()
    {
        _cli.Run("init");
        _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(1000));
        var first = _cli.Run("record", "validation", "--configuration", "{\"a\":1}", "--score", "0.3012", "--guard", "ladder:0.01");
        Assert.Equal(ExitCodes.Success, first.Exit);
        Assert.Equal("look 1 on holdout 'validation': released 0.3000 by ladder:0.01", first.Out.Trim());
        var second = _cli.Run("record", "validation", "--configuration", "{\"a\":2}", "--score", "0.2950", "--guard", "ladder:0.01", "--adaptive");
        Assert.Contains("(adaptive): released 0.3000", second.Out);
        var json = System.Text.Json.JsonDocument.Parse(_cli.Run("statement", "validation", "--format", "json").Out).RootElement;
        Assert.Equal(1, json.GetProperty("adaptiveLooks").GetInt32());
        Assert.Equal("adaptive-transcript", json.GetProperty("bounds")[0].GetProperty("method").GetString());
        Assert.True(json.GetProperty("bounds")[0].GetProperty("tightest").GetBoolean());
        Assert.True(json.GetProperty("logEffectiveLooks").GetDouble() > Math.Log(2));
        Assert.Contains("ln M_eff", _cli.Run("statement", "validation").Out);

        Assert.Equal(ExitCodes.BadArguments, _cli.Run("record", "validation", "--configuration", "{}", "--score", "0.2", "--guard", "ladder").Exit);
        var thresholdout = _cli.Run("record", "validation", "--configuration", "{}", "--score", "0.2", "--guard", "thresholdout:0.04,0.01,5");
        Assert.Equal(ExitCodes.BadArguments, thresholdout.Exit);
        Assert.Contains("--train-score", thresholdout.Err);
        var told = _cli.Run("record", "validation", "--configuration", "{}", "--score", "0.2", "--guard", "thresholdout:0.04,0,5", "--train-score", "0.19", "--adaptive");
        Assert.Contains("released 0.1900 by thresholdout:0.04,0,5", told.Out);
    }

    [Fact]
    public void Named_guard_streams_keep_their_guard_and_seed_and_verify_replays_them()
    {
        _cli.Run("init");
        _cli.Run("holdout", "add", "validation", "--labels", _cli.Labels(1000));
        var first = _cli.Run("record", "validation", "--configuration", "{\"a\":1}", "--score", "0.30", "--guard", "ladder:0.01", "--stream", "tuning", "--adaptive");
        Assert.Equal("look 1 on holdout 'validation' (adaptive): released 0.3000 by ladder:0.01 on stream 'tuning'", first.Out.Trim());
        var noisy = _cli.Run("record", "validation", "--configuration", "{\"a\":2}", "--score", "0.30", "--guard", "thresholdout:0.02,0.01,5", "--train-score", "0.1", "--stream", "noisy", "--seed", "42", "--format", "json");
        Assert.Equal(ExitCodes.Success, noisy.Exit);
        Assert.Equal("noisy", System.Text.Json.JsonDocument.Parse(noisy.Out).RootElement.GetProperty("stream").GetString());
        var head = System.Text.Json.JsonDocument.Parse(_cli.Run("verify", "--format", "json").Out).RootElement.GetProperty("chainHead").GetString();

        // Another guard on the stream, or another seed: one line, exit 2, nothing written.
        foreach (var (args, words) in new[]
        {
            (new[] { "--guard", "ladder:0.02", "--stream", "tuning" }, "the guard stream 'tuning' on holdout 'validation' releases by ladder:0.01, not ladder:0.02; give --guard ladder:0.01 for it, or name a new stream with --stream NAME."),
            (new[] { "--guard", "thresholdout:0.02,0.01,5", "--train-score", "0.1", "--stream", "noisy", "--seed", "43" }, "draws its noise from seed 42, not 43"),
            (new[] { "--stream", "tuning" }, "needs its guard; give --guard SPEC with --stream."),
        })
        {
            var refused = _cli.Run(["record", "validation", "--configuration", "{\"a\":3}", "--score", "0.2", .. args]);
            Assert.Equal(ExitCodes.BadArguments, refused.Exit);
            Assert.Single(refused.Err.Trim().Split('\n'));
            Assert.Contains(words, refused.Err);
        }

        var verify = _cli.Run("verify", "--format", "json");
        var root = System.Text.Json.JsonDocument.Parse(verify.Out).RootElement;
        Assert.Equal(head, root.GetProperty("chainHead").GetString());
        var recount = root.GetProperty("holdouts")[0];
        Assert.Equal((2, 2, 2), (recount.GetProperty("looks").GetInt32(), recount.GetProperty("guardStreams").GetInt32(), recount.GetProperty("releasesReplayed").GetInt32()));
        Assert.Contains("holdout 'validation': 2 look(s), 1 adaptive, ln M_eff", _cli.Run("verify").Out);
        Assert.Contains("2 guarded release(s) on 2 stream(s) replayed and as recorded", _cli.Run("verify").Out);
    }

    [Fact]
    public void Auc_holdouts_take_scores_as_predictions()
    {
        _cli.Run("init");
        var labels = _cli.Write("auc-labels.csv", "id,label\n" + string.Concat(Enumerable.Range(1, 200).Select(i => $"r{i},{(i % 4 == 0 ? 1 : 0)}\n")));
        Assert.Equal(ExitCodes.Success, _cli.Run("holdout", "add", "ranked", "--labels", labels, "--metric", "auc").Exit);
        // Scores that rank every positive above every negative: AUC 1.
        var scores = _cli.Write("scores.csv", "id,prediction\n" + string.Concat(Enumerable.Range(1, 200).Select(i => $"r{i},{(i % 4 == 0 ? 0.9 : 0.1)}\n")));
        var look = _cli.Run("record", "ranked", "--configuration", "{}", "--predictions", scores);
        Assert.Contains("auc 1.0000", look.Out);
        var json = System.Text.Json.JsonDocument.Parse(_cli.Run("statement", "ranked", "--format", "json").Out).RootElement;
        // Agarwal et al. 2005 with m = 50 positives, n = 150 negatives, one look, δ = 0.05 one-sided.
        Assert.Equal(1 - Math.Sqrt(200 * Math.Log(20) / (2.0 * 50 * 150)), json.GetProperty("bounds")[0].GetProperty("bound").GetDouble(), 12);
        var bad = _cli.Write("bad-auc.csv", "id,label\na,1\nb,2\n");
        Assert.Equal(ExitCodes.BadInput, _cli.Run("holdout", "add", "bad", "--labels", bad, "--metric", "auc").Exit);
    }
}

public sealed class SimulateCommandTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    [Fact]
    public void Simulate_reports_raw_and_per_method_coverage_in_json()
    {
        var result = _cli.Run("simulate", "--holdout-size", "500", "--looks", "50", "--true-error", "0.1:0.3", "--repetitions", "400", "--seed", "3", "--format", "json", "--no-ledger");
        Assert.Equal(ExitCodes.Success, result.Exit);
        var root = System.Text.Json.JsonDocument.Parse(result.Out).RootElement;
        var raw = root.GetProperty("raw");
        Assert.True(raw.GetProperty("meanObserved").GetDouble() < raw.GetProperty("meanTrue").GetDouble());
        Assert.InRange(raw.GetProperty("coverage").GetDouble(), 0, 1);
        var methods = root.GetProperty("methods").EnumerateArray().ToList();
        Assert.Equal(["adaptive-transcript", "binomial-union", "kl-union", "hoeffding-union"], methods.Select(m => m.GetProperty("method").GetString()));
        Assert.All(methods, m =>
        {
            Assert.InRange(m.GetProperty("coverage").GetDouble(), 0, 1);
            Assert.True(m.GetProperty("coverageStdErr").GetDouble() >= 0);
            Assert.True(m.GetProperty("meanMargin").GetDouble() > 0);
        });
        // Same seed, same numbers.
        Assert.Equal(result.Out, _cli.Run("simulate", "--holdout-size", "500", "--looks", "50", "--true-error", "0.1:0.3", "--repetitions", "400", "--seed", "3", "--format", "json", "--no-ledger").Out);
        var table = _cli.Run("simulate", "--strategy", "attack", "--holdout-size", "500", "--looks", "40", "--true-error", "0.5", "--repetitions", "200", "--no-ledger");
        Assert.Contains("not valid for an adaptive analyst", table.Out);
        Assert.Equal(ExitCodes.BadArguments, _cli.Run("simulate", "--true-error", "0.3:0.1", "--no-ledger").Exit);
        Assert.Equal(ExitCodes.BadArguments, _cli.Run("simulate", "--correlation", "1", "--no-ledger").Exit);
        Assert.Equal(ExitCodes.BadArguments, _cli.Run("simulate", "--guard", "ladder:2", "--no-ledger").Exit);
    }

    [Fact]
    public void Simulate_per_example_reports_chained_binomial_and_every_method_against_the_oracle()
    {
        string[] args = ["simulate", "--per-example", "--holdout-size", "2000", "--looks", "100", "--true-error", "0.2", "--correlation", "0.99", "--repetitions", "300", "--seed", "4", "--format", "json", "--no-ledger"];
        var result = _cli.Run(args);
        Assert.Equal(ExitCodes.Success, result.Exit);
        var root = System.Text.Json.JsonDocument.Parse(result.Out).RootElement;
        Assert.True(root.GetProperty("options").GetProperty("perExample").GetBoolean());
        var oracle = root.GetProperty("oracleMargin").GetDouble();
        Assert.True(oracle > 0);
        var methods = root.GetProperty("methods").EnumerateArray().ToDictionary(m => m.GetProperty("method").GetString()!);
        Assert.Equal(["binomial-union", "kl-union", "hoeffding-union", "chained-binomial", "smallest-listed"], methods.Keys);
        foreach (var m in methods.Values)
        {
            Assert.Equal(m.GetProperty("meanMargin").GetDouble() / oracle, m.GetProperty("marginToOracle").GetDouble(), 12);
        }

        Assert.True(methods["smallest-listed"].GetProperty("selection").GetBoolean());
        Assert.False(methods["chained-binomial"].GetProperty("selection").GetBoolean());
        // At ρ = 0.99 the looks share nearly every mistake: chained-binomial is the tighter guarantee.
        Assert.True(methods["chained-binomial"].GetProperty("marginToOracle").GetDouble() < methods["binomial-union"].GetProperty("marginToOracle").GetDouble());
        Assert.Equal(result.Out, _cli.Run(args).Out);
        var png = Path.Combine(_cli.Folder, "simulation.png");
        var table = _cli.Run("simulate", "--per-example", "--looks", "20", "--repetitions", "50", "--plot", png, "--no-ledger");
        Assert.Contains("oracle margin", table.Out);
        Assert.Contains("/ oracle", table.Out);
        Assert.Equal(new byte[] { 0x89, 0x50, 0x4E, 0x47 }, File.ReadAllBytes(png)[..4]); // the PNG signature
        var svg = Path.Combine(_cli.Folder, "simulation.svg");
        Assert.Equal(ExitCodes.Success, _cli.Run("simulate", "--looks", "20", "--repetitions", "50", "--plot", svg, "--no-ledger").Exit);
        Assert.Contains("<svg", File.ReadAllText(svg));
        var badPlot = _cli.Run("simulate", "--looks", "20", "--repetitions", "50", "--plot", Path.Combine(_cli.Folder, "s.gif"), "--no-ledger");
        Assert.Equal(ExitCodes.BadArguments, badPlot.Exit);
        Assert.Equal("", badPlot.Out);
        var refused = _cli.Run("simulate", "--per-example", "--strategy", "refine", "--no-ledger");
        Assert.Equal(ExitCodes.BadArguments, refused.Exit);
        Assert.Equal("accountant: --per-example simulates non-adaptive searches only; use it with --strategy fixed.", refused.Err.Trim());
    }
}

public sealed class SearchCommandTests : IDisposable
{
    private readonly CliHarness _cli = new();

    public void Dispose() => _cli.Dispose();

    [Fact]
    public void Search_unseal_and_plot_from_the_command_line()
    {
        var data = Path.Combine(_cli.Folder, "bakery.csv");
        Assert.Equal(ExitCodes.Success, _cli.Run("demo", "--export", data, "--export-rows", "400", "--no-ledger").Exit);
        var search = _cli.Run("search", data, "--label", "sold_out", "--id-column", "day", "--looks", "3", "--format", "json", "--plot", Path.Combine(_cli.Folder, "s.png"));
        Assert.Equal(ExitCodes.Success, search.Exit);
        Assert.Contains("task inferred", search.Err);
        var statement = System.Text.Json.JsonDocument.Parse(search.Out).RootElement;
        Assert.Equal("bakery-validation", statement.GetProperty("holdout").GetProperty("name").GetString());
        Assert.Equal(3, statement.GetProperty("looks").GetInt32());
        Assert.True(File.Exists(Path.Combine(_cli.Folder, "s.png")));

        var unseal = _cli.Run("unseal", "bakery-validation", "--format", "json");
        Assert.Equal(ExitCodes.Success, unseal.Exit);
        var opened = System.Text.Json.JsonDocument.Parse(unseal.Out).RootElement;
        Assert.Equal("bakery-validation", opened.GetProperty("holdout").GetProperty("name").GetString());
        Assert.Equal(statement.GetProperty("best").GetProperty("look").GetInt32(), opened.GetProperty("look").GetInt32());
        Assert.Equal(statement.GetProperty("best").GetProperty("observed").GetDouble(), opened.GetProperty("validation").GetProperty("observed").GetDouble());
        Assert.InRange(opened.GetProperty("test").GetProperty("observed").GetDouble(), 0, 1);
        Assert.Equal(1, opened.GetProperty("testOpenings").GetInt32());
        Assert.NotEmpty(opened.GetProperty("bounds").EnumerateArray());
        var again = _cli.Run("unseal", "bakery-validation");
        Assert.Contains("test-reopened", again.Out);
        Assert.Contains("opened 2 times", again.Err);

        Assert.Equal(ExitCodes.Success, _cli.Run("plot", "bakery-validation", "--out", Path.Combine(_cli.Folder, "p.svg")).Exit);
        Assert.Equal(ExitCodes.BadArguments, _cli.Run("plot", "bakery-validation", "--out", Path.Combine(_cli.Folder, "p.bmp")).Exit);
        Assert.Equal(ExitCodes.BadInput, _cli.Run("search", data, "--label", "nope").Exit);
        Assert.Equal(ExitCodes.BadArguments, _cli.Run("search", data).Exit);
        Assert.Contains("\"trainers\"", _cli.Run("search", "--print-space", "--task", "regression", "--no-ledger").Out);

        // Out-of-range caps and hash bits: one line, exit 2, before the file is read (no new holdout).
        foreach (var (option, value, says) in new[]
        {
            ("--max-training-rows", "1", "--max-training-rows must be at least 2"), ("--max-validation-rows", "0", "--max-validation-rows must be at least 2"),
            ("--max-test-rows", "-5", "--max-test-rows must be at least 2"), ("--hash-bits", "30", "--hash-bits must be between 4 and 20"), ("--hash-bits", "3", "--hash-bits must be between 4 and 20"),
        })
        {
            var refused = _cli.Run("search", data, "--label", "sold_out", "--name", "other", option, value);
            Assert.Equal(ExitCodes.BadArguments, refused.Exit);
            var line = Assert.Single(refused.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries));
            Assert.Contains(says, line);
        }

        using var book = Bookkeeper.Open(_cli.Ledger);
        Assert.Single(book.Store.Holdouts());
    }
}
