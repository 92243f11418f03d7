using System.CommandLine;
using System.Globalization;
using Accountant.Bounds;
using Accountant.Statements;

namespace Accountant.Cli.Commands;

/// <summary>Options and plumbing shared by the verbs.</summary>
internal static class Common
{
    public const string LedgerVariable = "ACCOUNTANT_LEDGER";
    public const string DefaultLedger = "accountant.db";

    /// <summary>The global --ledger option, inherited by every verb.</summary>
    public static Option<string?> LedgerOption { get; } = new("--ledger")
    {
        Description = $"The ledger: a file (SQLite), or a PostgreSQL address (postgresql://USER@HOST/DATABASE or Host=...;Database=...) shared by a team (else ${LedgerVariable}, else ./{DefaultLedger}).",
        Recursive = true,
    };

    public static string LedgerPath(ParseResult result, CliEnvironment env) =>
        result.GetValue(LedgerOption) is { Length: > 0 } path ? path
        : env.Variable(LedgerVariable) is { Length: > 0 } fromEnvironment ? fromEnvironment
        : DefaultLedger;

    public static Option<string> Format(params string[] formats)
    {
        var option = new Option<string>("--format")
        {
            Description = $"Output format: {string.Join(", ", formats)}.",
            DefaultValueFactory = _ => formats[0],
        };
        option.AcceptOnlyFromAmong(formats);
        return option;
    }

    public static Option<double> Confidence() => new("--confidence")
    {
        Description = "Confidence 1 − δ of the bounds, strictly between 0 and 1.",
        DefaultValueFactory = _ => 0.95,
    };

    public static Option<double> Tolerance(double? fallback, bool required = false)
    {
        var option = new Option<double>("--tolerance")
        {
            Description = "The margin the budget is measured against (the largest acceptable distance between bound and observed score).",
            Required = required,
        };
        if (fallback is { } value) option.DefaultValueFactory = _ => value;
        return option;
    }

    public static Option<bool> TwoSided() => new("--two-sided") { Description = "Report two-sided intervals (δ/2 each side) instead of the conservative side only." };

    public static StatementOptions StatementOptions(ParseResult r, Option<double> confidence, Option<double> tolerance, Option<bool> twoSided) => new()
    {
        Confidence = r.GetValue(confidence),
        Tolerance = r.GetValue(tolerance),
        Sided = r.GetValue(twoSided) ? Sidedness.TwoSided : Sidedness.OneSided,
    };

    /// <summary>Runs a verb's work, turning user-facing errors into one line on stderr and the matching exit code.</summary>
    public static int Guard(CliEnvironment env, Func<int> work)
    {
        try
        {
            return work();
        }
        catch (AccountantException e)
        {
            env.Error.WriteLine("accountant: " + e.Message);
            return ExitCodes.For(e.Kind);
        }
        catch (OperationCanceledException)
        {
            env.Error.WriteLine("accountant: interrupted; every finished look was kept.");
            return ExitCodes.Interrupted;
        }
    }

}
