using System.Diagnostics;
using Accountant.Ledger;
using Accountant.Tests.Support;
using Microsoft.Data.Sqlite;

namespace Accountant.Tests.Reliability;

/// <summary>
/// Another writer holds the ledger's write lock. Within the busy timeout a write waits (SQLite retries with growing
/// pauses) and then succeeds; only a lock held beyond it ends in one clear error, and nothing is written.
/// </summary>
public sealed class LockTests
{
    /// <summary>Another connection takes the lock a writer takes: BEGIN IMMEDIATE on SQLite, the chain's table lock on PostgreSQL.</summary>
    private static System.Data.Common.DbConnection HoldWriteLock(TempLedger temp)
    {
        System.Data.Common.DbConnection holder = temp.Backend == Backend.Postgres
            ? new Npgsql.NpgsqlConnection(temp.Location)
            : new SqliteConnection($"Data Source={temp.Path};Pooling=False");
        holder.Open();
        using var begin = holder.CreateCommand();
        begin.CommandText = temp.Backend == Backend.Postgres ? "BEGIN; LOCK TABLE entries IN EXCLUSIVE MODE;" : "BEGIN IMMEDIATE;";
        begin.ExecuteNonQuery();
        return holder;
    }

    private static Bookkeeper OpenWithTimeout(TempLedger temp, TimeSpan timeout) => new(temp.Backend == Backend.Postgres
        ? PostgresLedgerStore.Open(LedgerLocation.Parse(temp.Location), new FixedClock(), lockTimeout: timeout)
        : SqliteLedgerStore.Open(temp.Path, new FixedClock(), busyTimeout: timeout));

    [Theory]
    [InlineData(Backend.Sqlite)]
    [InlineData(Backend.Postgres)]
    public void A_lock_released_within_the_busy_timeout_is_waited_for_and_the_look_is_recorded(Backend backend)
    {
        using var _temp = new TempLedger(backend);
        using (var book = _temp.Create()) book.RegisterHoldout("validation", TempLedger.Examples(10));
        var holder = HoldWriteLock(_temp);
        var release = new Thread(() =>
        {
            Thread.Sleep(1500);
            holder.Dispose(); // rolls back and releases the lock
        });
        release.Start();

        var timer = Stopwatch.StartNew();
        using (var book = OpenWithTimeout(_temp, TimeSpan.FromSeconds(20)))
        {
            var look = book.Record("validation", "{\"k\":1}", 0.2);
            Assert.Equal(1, look.Number);
        }

        timer.Stop();
        release.Join();
        Assert.True(timer.Elapsed >= TimeSpan.FromSeconds(1.2), $"the write did not wait for the lock ({timer.Elapsed.TotalSeconds:0.00} s)");
        using var reader = _temp.Open();
        Assert.Single(reader.Store.Looks(reader.Holdout("validation")));
        Assert.True(reader.Verify().Valid);
    }

    [Theory]
    [InlineData(Backend.Sqlite)]
    [InlineData(Backend.Postgres)]
    public void A_lock_held_beyond_the_busy_timeout_ends_in_one_clear_error_and_writes_nothing(Backend backend)
    {
        using var _temp = new TempLedger(backend);
        string head;
        using (var book = _temp.Create())
        {
            book.RegisterHoldout("validation", TempLedger.Examples(10));
            head = book.Store.ChainHead()!;
        }

        using (HoldWriteLock(_temp))
        {
            var timer = Stopwatch.StartNew();
            using var book = OpenWithTimeout(_temp, TimeSpan.FromSeconds(1));
            var error = Assert.Throws<AccountantException>(() => book.Record("validation", "{\"k\":1}", 0.2));
            timer.Stop();
            Assert.Equal(ErrorKind.LedgerUnusable, error.Kind);
            Assert.Contains("stayed locked by another writer for more than 1 s", error.Message);
            Assert.DoesNotContain('\n', error.Message);
            Assert.True(timer.Elapsed >= TimeSpan.FromSeconds(0.9), $"gave up before the busy timeout ({timer.Elapsed.TotalSeconds:0.00} s)");
        }

        using var reader = _temp.Open();
        Assert.Equal(head, reader.Store.ChainHead());
        Assert.Empty(reader.Store.Looks(reader.Holdout("validation")));
    }
}
