using System.CommandLine;
using Accountant.Ledger;

namespace Accountant.Cli.Commands;

internal sealed class InitCommand : Command
{
    public InitCommand(CliEnvironment env)
        : base("init", "Create an empty ledger: a SQLite file, or the tables in a PostgreSQL database (or ?schema=NAME in it).\nExample: accountant init --ledger project.db")
    {
        SetAction(result => Common.Guard(env, () =>
        {
            var path = Common.LedgerPath(result, env);
            using var book = Bookkeeper.Create(path, env.Clock);
            env.Output.WriteLine($"created ledger {book.Store.Location} (schema version {SqliteLedgerStore.SchemaVersion})");
            return ExitCodes.Success;
        }));
    }
}
