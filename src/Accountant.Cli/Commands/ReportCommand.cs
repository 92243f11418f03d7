using System.CommandLine;
using Accountant.Cli.Output;
using Accountant.Search.Plots;

namespace Accountant.Cli.Commands;

internal sealed class ReportCommand : Command
{
    public ReportCommand(CliEnvironment env)
        : base("report", "Write one self-contained HTML page: the statement, the plot, the tie set, the warnings and the cautions.\nExample: accountant report validation --out report.html")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout." };
        var output = new Option<string>("--out") { Description = "The HTML file to write.", Required = true };
        var confidence = Common.Confidence();
        var tolerance = Common.Tolerance(0.02);
        var twoSided = Common.TwoSided();
        Arguments.Add(name);
        foreach (var option in new Option[] { output, confidence, tolerance, twoSided }) Options.Add(option);
        SetAction(r => Common.Guard(env, () =>
        {
            var path = r.GetValue(output)!;
            if (!path.EndsWith(".html", StringComparison.OrdinalIgnoreCase) && !path.EndsWith(".htm", StringComparison.OrdinalIgnoreCase))
            {
                throw AccountantException.BadArguments($"the report file '{path}' must end in .html.");
            }

            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var holdout = book.Holdout(r.GetValue(name)!);
            var options = Common.StatementOptions(r, confidence, tolerance, twoSided);
            // The tie set needs per-example 0/1 losses; without them the report leaves it out.
            var statement = holdout.Metric.IsZeroOne() && book.Store.Looks(holdout).Count(l => l.HasLosses) >= 2
                ? book.Statement(holdout.Name, options with { Winner = true })
                : book.Statement(holdout.Name, options);
            string? svg = null;
            if (statement.Looks > 0)
            {
                var temporary = Path.Combine(Path.GetTempPath(), $"accountant-report-{Guid.NewGuid():N}.svg");
                try
                {
                    StatementPlot.Write(book, holdout.Name, temporary, options);
                    var text = File.ReadAllText(temporary);
                    var start = text.IndexOf("<svg", StringComparison.Ordinal);
                    svg = start >= 0 ? text[start..] : null;
                }
                finally
                {
                    File.Delete(temporary);
                }
            }

            try
            {
                File.WriteAllText(path, HtmlReport.Render(statement, svg, env.Clock.GetUtcNow()), new System.Text.UTF8Encoding(false));
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                throw AccountantException.BadArguments($"cannot write the report '{path}' ({e.Message.TrimEnd('.')}); check the folder.");
            }

            env.Output.WriteLine($"wrote {path}");
            return ExitCodes.Success;
        }));
    }
}
