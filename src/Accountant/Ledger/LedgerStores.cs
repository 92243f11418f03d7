namespace Accountant.Ledger;

/// <summary>Opens the right backend for a ledger location (see <see cref="LedgerLocation"/>).</summary>
public static class LedgerStores
{
    /// <summary>Creates a new ledger; refuses when one (or anything else) is already there.</summary>
    public static ILedgerStore Create(string location, TimeProvider? clock = null)
    {
        var where = LedgerLocation.Parse(location);
        return where.IsPostgres ? PostgresLedgerStore.Create(where, clock) : SqliteLedgerStore.Create(where.FilePath!, clock);
    }

    /// <summary>Opens an existing ledger.</summary>
    public static ILedgerStore Open(string location, TimeProvider? clock = null)
    {
        var where = LedgerLocation.Parse(location);
        return where.IsPostgres ? PostgresLedgerStore.Open(where, clock) : SqliteLedgerStore.Open(where.FilePath!, clock);
    }

    /// <summary>Opens the ledger, creating it first when there is none.</summary>
    public static ILedgerStore OpenOrCreate(string location, TimeProvider? clock = null)
    {
        var where = LedgerLocation.Parse(location);
        if (where.IsPostgres) return PostgresLedgerStore.Open(where, clock, create: true);
        return File.Exists(where.FilePath) ? SqliteLedgerStore.Open(where.FilePath!, clock) : SqliteLedgerStore.Create(where.FilePath!, clock);
    }
}
