namespace Accountant;

/// <summary>What went wrong, in the terms the command line maps to exit codes.</summary>
public enum ErrorKind
{
    /// <summary>Input data (a file, a score, a configuration) is malformed or does not match the holdout.</summary>
    BadInput,
    /// <summary>An argument is out of range or names something that does not exist.</summary>
    BadArguments,
    /// <summary>The ledger's chain or contents do not verify.</summary>
    Integrity,
    /// <summary>The ledger cannot be used: missing, locked beyond the busy timeout, newer schema, not a ledger, read-only.</summary>
    LedgerUnusable,
}

/// <summary>
/// An error the user can act on. The message is one sentence that says what was wrong and what to do;
/// when one of these is thrown, nothing has been written to the ledger.
/// </summary>
public sealed class AccountantException : Exception
{
    public AccountantException(ErrorKind kind, string message, Exception? inner = null)
        : base(message, inner) => Kind = kind;

    public ErrorKind Kind { get; }

    public static AccountantException BadInput(string message) => new(ErrorKind.BadInput, message);
    public static AccountantException BadArguments(string message) => new(ErrorKind.BadArguments, message);
}
