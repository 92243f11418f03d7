using System.CommandLine;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class StatementCommand : Command
{
    public StatementCommand(CliEnvironment env)
        : base("statement", "The best look on a holdout with bounds corrected for every look, the budget left, warnings and cautions.\nExample: accountant statement validation --format json")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout." };
        var confidence = Common.Confidence();
        var tolerance = Common.Tolerance(0.02);
        var twoSided = Common.TwoSided();
        var format = Common.Format("table", "json", "markdown");
        Arguments.Add(name);
        foreach (var option in new Option[] { confidence, tolerance, twoSided, format }) Options.Add(option);
        SetAction(r => Common.Guard(env, () =>
        {
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var statement = book.Statement(r.GetValue(name)!, Common.StatementOptions(r, confidence, tolerance, twoSided));
            env.Output.Write(StatementWriter.Render(statement, r.GetValue(format)!));
            return ExitCodes.Success;
        }));
    }
}
