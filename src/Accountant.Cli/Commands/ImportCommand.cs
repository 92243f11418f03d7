using System.CommandLine;
using Accountant.Cli.Input;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class ImportCommand : Command
{
    public ImportCommand(CliEnvironment env)
        : base("import", "Record many looks at once from JSON Lines or CSV; all or nothing.\nExample: accountant import validation looks.jsonl")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout the looks were scored on." };
        var file = new Argument<string>("FILE") { Description = "JSON Lines ({\"configuration\":{...},\"score\":0.1} or \"predictions\":\"path.csv\") or CSV with a score column." };
        var search = new Option<string?>("--search") { Description = "A search label for looks that do not name one." };
        Arguments.Add(name);
        Arguments.Add(file);
        Options.Add(search);
        SetAction(r => Common.Guard(env, () =>
        {
            var path = r.GetValue(file)!;
            var looks = InputFiles.Import(path, r.GetValue(search));
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var holdout = book.Holdout(r.GetValue(name)!);
            var recorded = book.RecordMany(holdout.Name, looks.Select(l => l.Input).ToList(), i => $"'{path}' line {looks[i].Line}");
            env.Output.WriteLine($"imported {recorded.Count} look(s) on holdout '{holdout.Name}': numbers {recorded[0].Number}–{recorded[^1].Number}; best imported {holdout.Metric.Name()} {Text.N(holdout.Metric.HigherIsBetter() ? recorded.Max(l => l.Score) : recorded.Min(l => l.Score))}");
            return ExitCodes.Success;
        }));
    }
}
