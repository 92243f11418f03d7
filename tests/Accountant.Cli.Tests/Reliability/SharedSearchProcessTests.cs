using System.Diagnostics;
using Accountant.Ledger;
using Accountant.Tests.Support;
using Xunit.Abstractions;

namespace Accountant.Cli.Tests.Reliability;

/// <summary>
/// Worker processes of the built CLI on one shared search, one of them killed with SIGKILL while it trains. What must hold
/// is what a shared search promises: every configuration of the plan is trained to a look exactly once (the killed
/// worker's claim expires and another worker takes it over), every look is in the ledger once, numbered without a gap,
/// the chain verifies, and every surviving worker prints the same statement.
/// </summary>
public sealed class SharedSearchProcessTests(ITestOutputHelper output)
{
    /// <summary>Only FastTree with about 150 trees of about 60 leaves: a few tenths of a second a look on 400 rows here, and
    /// more with eight workers on two cores: long enough to be killed mid-training, short enough for a quick test.</summary>
    private const string SlowSpace = """{"trainers":[{"trainer":"fasttree","parameters":{"trees":{"scale":"integer","low":140,"high":150},"leaves":{"scale":"integer","low":56,"high":64},"minLeaf":{"scale":"integer","low":1,"high":2}}}]}""";

    [Fact]
    public void Three_worker_processes_on_a_SQLite_ledger_train_each_configuration_once_though_one_is_killed_mid_training()
    {
        using var cli = new CliHarness();
        Work(cli, cli.Ledger, workers: 3, looks: 6);
    }

    [Fact]
    public void Eight_worker_processes_on_a_PostgreSQL_ledger_train_each_configuration_once_though_one_is_killed_mid_training()
    {
        using var cli = new CliHarness();
        var ledger = PostgresServer.NewSchema(out var schema);
        try
        {
            Work(cli, ledger, workers: 8, looks: 16);
        }
        finally
        {
            PostgresServer.DropSchema(schema);
        }
    }

    /// <summary>One configuration, the slow one above made a single choice, so every look of a plan trains the same model and
    /// scores the same: the selected look is the earliest (ties go to the earliest look), which the first worker records.</summary>
    private const string OneSlowConfiguration = """{"trainers":[{"trainer":"fasttree","parameters":{"trees":{"scale":"choice","values":[150]},"leaves":{"scale":"choice","values":[60]},"minLeaf":{"scale":"choice","values":[1]},"learningRate":{"scale":"choice","values":[0.2]}}}]}""";

    [Fact]
    public void A_worker_killed_after_its_selected_look_was_recorded_and_before_it_saved_the_model_leaves_the_save_to_the_survivors()
    {
        using var cli = new CliHarness();
        var data = Path.Combine(cli.Folder, "bakery.csv");
        Assert.Equal(0, cli.Run("demo", "--export", data, "--export-rows", "400", "--no-ledger").Exit);
        var space = cli.Write("one.json", OneSlowConfiguration);
        Assert.Equal(0, cli.Run("init").Exit);
        string[] search = ["search", data, "--label", "sold_out", "--id-column", "day", "--looks", "4", "--space", space, "--share", "bakery-team",
            "--lease", "2s", "--format", "json", "--quiet", "--ledger", cli.Ledger];

        var timer = Stopwatch.StartNew();
        // The first worker starts alone, so it records look 1 (the selected one); it is killed while it trains task 2, after
        // its completion of task 1 committed: a worker saves the selected model only once every task is done.
        using var victim = new Processes.Running(Processes.Cli, search);
        var mark = $"-{victim.Process.Id}-";
        using var watcher = Bookkeeper.Open(cli.Ledger);
        PlanTask? second = null;
        while (second is null)
        {
            Assert.True(timer.Elapsed < TimeSpan.FromMinutes(2), "the first worker never reached its second task");
            Assert.False(victim.Process.HasExited, "the first worker ended before its second task");
            if (watcher.SharedPlans.FindPlan("bakery-team") is { } watched && watcher.SharedPlans.Tasks(watched) is { Count: 4 } t
                && t[0].State == TaskState.Done && t[0].CompletedBy!.Contains(mark, StringComparison.Ordinal)
                && t[1].State == TaskState.Claimed && t[1].Claimant!.Contains(mark, StringComparison.Ordinal))
            {
                second = t[1];
            }
            else
            {
                Thread.Sleep(20);
            }
        }

        victim.Kill();
        var plan = watcher.SharedPlans.FindPlan("bakery-team")!;
        var atKill = watcher.SharedPlans.Tasks(plan);
        Assert.True(atKill[1].State != TaskState.Done || atKill[1].CompletedBy != second.Claimant, "task 2 was completed by the first worker before the kill landed");
        Assert.Null(watcher.SharedPlans.FindSave(plan));
        var victimName = atKill[0].CompletedBy!;

        using var a = new Processes.Running(Processes.Cli, search);
        using var b = new Processes.Running(Processes.Cli, search);
        var finished = new[] { a.Wait(TimeSpan.FromMinutes(4)), b.Wait(TimeSpan.FromMinutes(4)) };
        foreach (var f in finished) Assert.True(f.Exit == 0, $"a worker exited {f.Exit}: {f.Err}");
        Assert.Single(finished.Select(f => f.Out).Distinct());

        // Look 1, the victim's, is selected; a survivor retrained it and saved its model and record, once.
        var looks = watcher.Store.Looks(watcher.Holdout("bakery-validation"));
        Assert.Equal([1, 2, 3, 4], looks.Select(l => l.Number));
        Assert.Single(looks.Select(l => l.Score).Distinct()); // one configuration, reproducible training: one score
        Assert.Equal(1, System.Text.Json.JsonDocument.Parse(finished[0].Out).RootElement.GetProperty("best").GetProperty("look").GetInt32());
        var save = watcher.SharedPlans.FindSave(plan)!;
        Assert.Equal((SaveState.Saved, 1, 1), (save.State, save.Look, save.Attempts));
        Assert.NotEqual(victimName, save.Worker);
        Assert.Single(finished, f => f.Err.Contains("retraining the selected look #1 ", StringComparison.Ordinal));
        var record = Search.SearchRecord.Read(save.Location!);
        Assert.Equal((1, "bakery-validation"), (record.Look, record.Holdout));
        Assert.True(File.Exists(record.ModelPath));
        // A --finish now finds the model saved: it says by whom, writes nothing and prints the same statement.
        var head = watcher.Store.ChainHead();
        using (var finish = new Processes.Running(Processes.Cli, [.. search, "--finish"]))
        {
            var done = finish.Wait();
            Assert.True(done.Exit == 0, done.Err);
            Assert.Equal(finished[0].Out, done.Out);
            Assert.Contains("the selected model was saved by worker", done.Err + done.Out, StringComparison.Ordinal);
        }

        Assert.Equal(save, watcher.SharedPlans.FindSave(plan));
        Assert.Equal(head, watcher.Store.ChainHead());
        var unseal = cli.Run("unseal", "bakery-validation", "--format", "json");
        Assert.True(unseal.Exit == 0, unseal.Err);
        Assert.Equal(80, System.Text.Json.JsonDocument.Parse(unseal.Out).RootElement.GetProperty("test").GetProperty("size").GetInt32());
        Assert.True(cli.Run("verify").Exit == 0);
        output.WriteLine($"first worker killed holding task 2 at {timer.Elapsed.TotalSeconds:0.0} s after recording look 1; saved by {save.Worker}");
    }

    [Fact]
    public void Wrong_share_arguments_end_in_one_line_with_their_exit_code_and_write_nothing()
    {
        using var cli = new CliHarness();
        var data = Path.Combine(cli.Folder, "bakery.csv");
        Assert.Equal(0, cli.Run("demo", "--export", data, "--export-rows", "100", "--no-ledger").Exit);
        string[] Search(params string[] extra) =>
            ["search", data, "--label", "sold_out", "--id-column", "day", "--looks", "2", "--quiet", .. extra.Contains("--share") || extra.Contains("--alone") ? extra.Where(e => e != "--alone") : [.. extra, "--share", "team"]];

        // No ledger yet: a shared worker does not create one (workers starting together would race to), and says how to.
        var missing = cli.Run(Search());
        Assert.Equal((ExitCodes.LedgerUnusable, false), (missing.Exit, File.Exists(cli.Ledger)));
        Assert.Contains("accountant init", missing.Err);
        Assert.Equal(0, cli.Run("init").Exit);
        string? head;
        using (var book = Bookkeeper.Open(cli.Ledger)) head = book.Store.ChainHead();
        foreach (var (extra, exit, says) in new (string[], int, string)[]
        {
            (["--lease", "soon"], ExitCodes.BadArguments, "--lease takes a positive duration"),
            (["--lease", "0s"], ExitCodes.BadArguments, "--lease takes a positive duration"),
            (["--lease", "500ms"], ExitCodes.BadArguments, "--lease must be at least 1 s"),
            (["--strategy", "refine"], ExitCodes.BadArguments, "refine chooses each configuration from every earlier look"),
            (["--share", "two\tlines"], ExitCodes.BadArguments, "--share needs a short printable name"),
            (["--finish", "--alone"], ExitCodes.BadArguments, "--finish saves the selected model of a shared search; name the search with --share NAME"),
            (["--finish"], ExitCodes.BadArguments, "the ledger has no shared search named 'team', so there is nothing to finish"),
        })
        {
            var result = cli.Run(Search(extra));
            Assert.True(result.Exit == exit, $"{string.Join(' ', extra)}: exit {result.Exit}, {result.Err}");
            var lines = result.Err.Split('\n', StringSplitOptions.RemoveEmptyEntries).Where(l => !l.Contains("task inferred", StringComparison.Ordinal)).ToList();
            Assert.Single(lines);
            Assert.StartsWith("accountant: ", lines[0]);
            Assert.Contains(says, lines[0]);
            using var book = Bookkeeper.Open(cli.Ledger);
            Assert.Equal(head, book.Store.ChainHead());
            Assert.Empty(book.Store.Holdouts());
            Assert.Null(book.SharedPlans.FindPlan("team"));
        }
    }

    private void Work(CliHarness cli, string ledger, int workers, int looks)
    {
        var data = Path.Combine(cli.Folder, "bakery.csv");
        Assert.Equal(0, cli.Run("demo", "--export", data, "--export-rows", "400", "--no-ledger").Exit);
        var space = cli.Write("slow.json", SlowSpace);
        Assert.Equal(0, cli.Run("init", "--ledger", ledger).Exit);
        string[] search = ["search", data, "--label", "sold_out", "--id-column", "day", "--looks", looks.ToString(System.Globalization.CultureInfo.InvariantCulture),
            "--space", space, "--share", "bakery-team", "--lease", "2s", "--format", "json", "--quiet", "--ledger", ledger];

        var timer = Stopwatch.StartNew();
        var running = Enumerable.Range(0, workers).Select(_ => new Processes.Running(Processes.Cli, search)).ToList();
        try
        {
            // Watch the plan until the first worker holds a claim, then kill it: it is training (a claim lasts from the
            // claim to the completion, and training is the only work between them).
            var victim = running[0];
            var mark = $"-{victim.Process.Id}-";
            using var watcher = Bookkeeper.Open(ledger);
            PlanTask? held = null;
            while (held is null)
            {
                Assert.True(timer.Elapsed < TimeSpan.FromMinutes(2), "the first worker never claimed a task");
                Assert.False(victim.Process.HasExited, "the first worker ended before it claimed a task");
                if (watcher.SharedPlans.FindPlan("bakery-team") is { } watched)
                {
                    held = watcher.SharedPlans.Tasks(watched).FirstOrDefault(t => t.State == TaskState.Claimed && t.Claimant!.Contains(mark, StringComparison.Ordinal));
                }

                if (held is null) Thread.Sleep(20);
            }

            victim.Kill();
            var killedAt = timer.Elapsed;
            var plan = watcher.SharedPlans.FindPlan("bakery-team")!;
            var atKill = watcher.SharedPlans.Tasks(plan).Single(t => t.Number == held.Number);
            Assert.True(atKill.State != TaskState.Done || atKill.CompletedBy != held.Claimant, $"task {held.Number} was completed by the first worker before the kill landed");

            var finished = running.Skip(1).Select(r => r.Wait(TimeSpan.FromMinutes(4))).ToList();
            foreach (var f in finished) Assert.True(f.Exit == 0, $"a worker exited {f.Exit}: {f.Err}");

            // The same statement from every surviving worker.
            Assert.Single(finished.Select(f => f.Out).Distinct());
            Assert.Contains("\"chainHead\"", finished[0].Out);

            var tasks = watcher.SharedPlans.Tasks(plan);
            var looksStored = watcher.Store.Looks(watcher.Holdout("bakery-validation"));
            Assert.Equal(looks, tasks.Count);
            Assert.All(tasks, t => Assert.Equal(TaskState.Done, t.State));
            Assert.Equal(Enumerable.Range(1, looks), looksStored.Select(l => l.Number)); // gapless, and the abandoned claim is no look
            Assert.Equal(Enumerable.Range(1, looks), tasks.Select(t => t.LookNumber!.Value).Order()); // each look is one task's
            Assert.Equal(tasks.Select(t => ConfigurationJson.Canonicalize(t.Configuration)).Order(StringComparer.Ordinal),
                looksStored.Select(l => l.Configuration).Order(StringComparer.Ordinal)); // every configuration once
            var retried = tasks.Single(t => t.Number == held.Number);
            Assert.True(retried.Attempts >= 2, $"task {held.Number} was claimed {retried.Attempts} time(s)");
            Assert.NotEqual(held.Claimant, retried.CompletedBy);
            Assert.Contains(finished, f => f.Err.Contains($"took over task {held.Number} ", StringComparison.Ordinal));

            var verify = cli.Run("verify", "--ledger", ledger);
            Assert.True(verify.Exit == 0, verify.Out + verify.Err);
            var by = tasks.GroupBy(t => t.CompletedBy).Select(g => g.Count()).OrderDescending();
            output.WriteLine($"{workers} workers, {looks} configurations: worker 1 killed at {killedAt.TotalSeconds:0.0} s holding task {held.Number}, which was taken over (attempt {retried.Attempts}); " +
                             $"looks per surviving worker {string.Join(", ", by)}; all done at {timer.Elapsed.TotalSeconds:0.0} s; chain verified.");
        }
        finally
        {
            foreach (var r in running)
            {
                r.Kill();
                r.Dispose();
            }
        }
    }
}
