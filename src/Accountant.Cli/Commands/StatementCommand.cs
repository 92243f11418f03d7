using System.CommandLine;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class StatementCommand : Command
{
    public StatementCommand(CliEnvironment env)
        : base("statement", "The best look on a holdout with bounds corrected for every look, the budget left, warnings and cautions.\nExample: accountant statement validation --estimates --winner --format json")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout." };
        var confidence = Common.Confidence();
        var tolerance = Common.Tolerance(0.02);
        var twoSided = Common.TwoSided();
        var format = Common.Format("table", "json", "markdown", "latex");
        var estimates = new Option<bool>("--estimates") { Description = "Add the bootstrap estimates bootstrap-bias and max-bootstrap (estimates, not guarantees; reads every look's per-example losses)." };
        var winner = new Option<bool>("--winner") { Description = "Add the winner test: exact McNemar of the best look against the runner-up, and the looks Holm's step-down cannot tell from the best." };
        var resamples = new Option<int>("--resamples") { Description = "Bootstrap resamples B for --estimates.", DefaultValueFactory = _ => Accountant.Estimates.BootstrapSettings.DefaultResamples };
        var seed = new Option<ulong>("--seed") { Description = "The bootstrap's seed; the same seed gives the same estimates.", DefaultValueFactory = _ => Accountant.Estimates.BootstrapSettings.DefaultSeed };
        Arguments.Add(name);
        foreach (var option in new Option[] { confidence, tolerance, twoSided, estimates, winner, resamples, seed, format }) Options.Add(option);
        SetAction(r => Common.Guard(env, () =>
        {
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var options = Common.StatementOptions(r, confidence, tolerance, twoSided) with
            {
                Estimates = r.GetValue(estimates),
                Winner = r.GetValue(winner),
                Resamples = r.GetValue(resamples),
                Seed = r.GetValue(seed),
            };
            var statement = book.Statement(r.GetValue(name)!, options);
            env.Output.Write(StatementWriter.Render(statement, r.GetValue(format)!));
            return ExitCodes.Success;
        }));
    }
}
