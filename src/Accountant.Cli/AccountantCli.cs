using System.CommandLine;
using System.Globalization;
using Accountant.Cli.Commands;

namespace Accountant.Cli;

/// <summary>The <c>accountant</c> command line: builds the verbs and runs one, in-process and testable.</summary>
public static class AccountantCli
{
    public static RootCommand Build(CliEnvironment env)
    {
        var root = new RootCommand("Accountant counts every look at a validation set and reports the best score with a bound corrected for the comparisons made.")
        {
            new InitCommand(env),
            new HoldoutCommand(env),
            new RecordCommand(env),
            new ImportCommand(env),
            new StatementCommand(env),
            new CompareCommand(env),
            new BudgetCommand(env),
            new PlanCommand(env),
            new VoidCommand(env),
            new VerifyCommand(env),
            new CopyCommand(env),
            new SearchCommand(env),
            new UnsealCommand(env),
            new PlotCommand(env),
            new ReportCommand(env),
            new SimulateCommand(env),
            new DemoCommand(env),
        };
        root.Options.Add(Common.LedgerOption);
        // --version prints this tool's version (the built-in one reads the entry assembly, which is the test host in tests).
        foreach (var version in root.Options.OfType<VersionOption>()) version.Action = new PrintVersion(env);
        root.SetAction(_ =>
        {
            env.Output.WriteLine("accountant: count every look at a validation set; report the best score with a corrected bound.");
            env.Output.WriteLine();
            env.Output.WriteLine("Start here:");
            env.Output.WriteLine("  accountant demo                                   watch a real search being accounted for");
            env.Output.WriteLine("  accountant init && accountant holdout add validation --labels labels.csv");
            env.Output.WriteLine("  accountant record validation --configuration '{\"leaves\":31}' --predictions preds.csv");
            env.Output.WriteLine("  accountant statement validation                   the corrected bound, the budget, the warnings");
            env.Output.WriteLine();
            env.Output.WriteLine("Every verb: accountant VERB --help");
            return ExitCodes.Success;
        });
        return root;
    }

    /// <summary>Parses and runs; a malformed command line is one line on stderr and <see cref="ExitCodes.BadArguments"/>.</summary>
    public static int Run(string[] args, CliEnvironment env)
    {
        // Numbers are read and written culture-invariant, whatever the machine's locale ("0.05" is never 5).
        var culture = CultureInfo.CurrentCulture;
        var uiCulture = CultureInfo.CurrentUICulture;
        CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
        try
        {
            return RunInvariant(args, env);
        }
        finally
        {
            CultureInfo.CurrentCulture = culture;
            CultureInfo.CurrentUICulture = uiCulture;
        }
    }

    private static int RunInvariant(string[] args, CliEnvironment env)
    {
        var root = Build(env);
        // '@file.json' is a configuration file of ours, not a response file of the parser's.
        var result = root.Parse(args, new ParserConfiguration { ResponseFileTokenReplacer = null });
        if (result.Errors.Count > 0)
        {
            var verb = result.CommandResult.Command == root ? "" : " " + result.CommandResult.Command.Name;
            var message = string.Join(' ', result.Errors[0].Message.Split((char[])['\n', '\r', '\t'], StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries));
            env.Error.WriteLine($"accountant: {message.TrimEnd('.')}; see 'accountant{verb} --help'.");
            return ExitCodes.BadArguments;
        }

        return result.Invoke(new InvocationConfiguration { Output = env.Output, Error = env.Error, ProcessTerminationTimeout = null });
    }
}

/// <summary>The action of <c>--version</c>: the informational version of the command-line assembly and the ledger schema it writes.</summary>
internal sealed class PrintVersion(CliEnvironment env) : System.CommandLine.Invocation.SynchronousCommandLineAction
{
    public static string Version { get; } =
        typeof(PrintVersion).Assembly.GetCustomAttributes(typeof(System.Reflection.AssemblyInformationalVersionAttribute), false)
            .OfType<System.Reflection.AssemblyInformationalVersionAttribute>().FirstOrDefault()?.InformationalVersion ?? "unknown";

    public override int Invoke(ParseResult parseResult)
    {
        env.Output.WriteLine($"{Version} (ledger schema {Accountant.Ledger.SqliteLedgerStore.SchemaVersion})");
        return ExitCodes.Success;
    }
}
