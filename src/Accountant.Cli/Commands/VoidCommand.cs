using System.CommandLine;

namespace Accountant.Cli.Commands;

internal sealed class VoidCommand : Command
{
    public VoidCommand(CliEnvironment env)
        : base("void", "Mark a look as a mistake; it can no longer be selected, and it still counts.\nExample: accountant void validation 7 --reason \"trained on the validation rows\"")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout." };
        var look = new Argument<int>("LOOK") { Description = "The look's number, as 'record' printed it." };
        var reason = new Option<string>("--reason") { Description = "Why the look was a mistake.", Required = true };
        Arguments.Add(name);
        Arguments.Add(look);
        Options.Add(reason);
        SetAction(r => Common.Guard(env, () =>
        {
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var entry = book.Void(r.GetValue(name)!, r.GetValue(look), r.GetValue(reason)!);
            env.Output.WriteLine($"voided look {entry.LookNumber} on holdout '{r.GetValue(name)}'; it still counts toward the looks");
            return ExitCodes.Success;
        }));
    }
}
