using System.CommandLine;
using Accountant.Search.Plots;

namespace Accountant.Cli.Commands;

internal sealed class PlotCommand : Command
{
    public PlotCommand(CliEnvironment env)
        : base("plot", "Draw the best score so far, the corrected bounds and the budget used against the number of looks.\nExample: accountant plot validation --out looks.png")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout." };
        var output = new Option<string>("--out") { Description = "The image to write: .png or .svg.", Required = true };
        var confidence = Common.Confidence();
        var tolerance = Common.Tolerance(0.02);
        Arguments.Add(name);
        foreach (var option in new Option[] { output, confidence, tolerance }) Options.Add(option);
        SetAction(r => Common.Guard(env, () =>
        {
            var path = r.GetValue(output)!;
            StatementPlot.CheckPath(path);
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var options = new Statements.StatementOptions { Confidence = r.GetValue(confidence), Tolerance = r.GetValue(tolerance) };
            StatementPlot.Write(book, book.Holdout(r.GetValue(name)!).Name, path, options);
            env.Output.WriteLine($"wrote {path}");
            return ExitCodes.Success;
        }));
    }
}
