namespace Accountant.Cli;

/// <summary>The process exit codes, documented in the README. Scripts can rely on them.</summary>
public static class ExitCodes
{
    /// <summary>The command did what was asked.</summary>
    public const int Success = 0;

    /// <summary>A gate failed: for example <c>budget --strict</c> on an overused holdout.</summary>
    public const int GateFailed = 1;

    /// <summary>The command line was wrong: an unknown option, a missing argument, a value out of range, an unknown holdout.</summary>
    public const int BadArguments = 2;

    /// <summary>An input file or value was malformed or does not match the holdout; nothing was written.</summary>
    public const int BadInput = 3;

    /// <summary>The ledger's chain does not verify, or a row is damaged.</summary>
    public const int LedgerIntegrity = 4;

    /// <summary>The ledger cannot be used: missing, not a ledger, newer schema, read-only, locked, disk full.</summary>
    public const int LedgerUnusable = 5;

    /// <summary>Stopped by Ctrl-C; every finished look was kept.</summary>
    public const int Interrupted = 130;

    public static int For(ErrorKind kind) => kind switch
    {
        ErrorKind.BadInput => BadInput,
        ErrorKind.BadArguments => BadArguments,
        ErrorKind.Integrity => LedgerIntegrity,
        ErrorKind.LedgerUnusable => LedgerUnusable,
        _ => BadInput,
    };
}
