using System.Diagnostics;
using Accountant.Ledger;
using Accountant.Tests.Support;
using Microsoft.Data.Sqlite;

namespace Accountant.Tests.Reliability;

/// <summary>
/// Another writer holds the ledger's write lock. Within the busy timeout a write waits (SQLite retries with growing
/// pauses) and then succeeds; only a lock held beyond it ends in one clear error, and nothing is written.
/// </summary>
public sealed class LockTests : IDisposable
{
    private readonly TempLedger _temp = new();

    public void Dispose() => _temp.Dispose();

    private SqliteConnection HoldWriteLock()
    {
        var holder = new SqliteConnection($"Data Source={_temp.Path};Pooling=False");
        holder.Open();
        using var begin = holder.CreateCommand();
        begin.CommandText = "BEGIN IMMEDIATE;";
        begin.ExecuteNonQuery();
        return holder;
    }

    [Fact]
    public void A_lock_released_within_the_busy_timeout_is_waited_for_and_the_look_is_recorded()
    {
        using (var book = _temp.Create()) book.RegisterHoldout("validation", TempLedger.Examples(10));
        var holder = HoldWriteLock();
        var release = new Thread(() =>
        {
            Thread.Sleep(1500);
            holder.Dispose(); // rolls back and releases the lock
        });
        release.Start();

        var timer = Stopwatch.StartNew();
        using (var book = new Bookkeeper(SqliteLedgerStore.Open(_temp.Path, new FixedClock(), busyTimeout: TimeSpan.FromSeconds(20))))
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

    [Fact]
    public void A_lock_held_beyond_the_busy_timeout_ends_in_one_clear_error_and_writes_nothing()
    {
        string head;
        using (var book = _temp.Create())
        {
            book.RegisterHoldout("validation", TempLedger.Examples(10));
            head = book.Store.ChainHead()!;
        }

        using (HoldWriteLock())
        {
            var timer = Stopwatch.StartNew();
            using var book = new Bookkeeper(SqliteLedgerStore.Open(_temp.Path, new FixedClock(), busyTimeout: TimeSpan.FromSeconds(1)));
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
