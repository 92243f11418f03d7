using Accountant.Guards;
using Accountant.Ledger;
using Accountant.Tests.Support;

namespace Accountant.Tests.Ledger;

/// <summary>
/// A large batch is hashed on a worker thread ahead of the inserts and its plain looks go through a narrower INSERT;
/// a single look is hashed in place through the full one. Both must leave the same rows and the same chain, and the
/// verifier (which recomputes every entry from the stored rows on its own) must accept both.
/// </summary>
public sealed class BatchChainTests : IDisposable
{
    private readonly TempLedger _batch = new();
    private readonly TempLedger _single = new();

    public void Dispose()
    {
        _batch.Dispose();
        _single.Dispose();
    }

    private sealed class StoppedClock : TimeProvider
    {
        public override DateTimeOffset GetUtcNow() => new(2026, 3, 4, 5, 6, 7, TimeSpan.Zero);
    }

    private static List<LookInput> Inputs(int count, int size)
    {
        var random = new Random(12);
        return Enumerable.Range(0, count).Select(i =>
        {
            var losses = new byte[(size + 7) / 8];
            random.NextBytes(losses);
            losses[^1] &= (byte)((1 << (size % 8 == 0 ? 8 : size % 8)) - 1);
            return (i % 7) switch
            {
                0 => new LookInput { Configuration = $$"""{"depth":{{i}},"name":"é{{i}}"}""", Score = 0.25, Search = "s1" },
                1 => new LookInput { Configuration = $$"""{ "b": {{i}}, "a": [1.0, -0, 1e-7] }""", Losses = losses, Stage = "0.5", Adaptive = true },
                2 => new LookInput { Configuration = $$"""{"x":{{i}}}""", Score = 0.5, Seconds = 1.5 },
                3 => new LookInput { Configuration = $$"""{"x":{{i}},"guarded":true}""", Score = 0.125, Guard = GuardSpec.Exact, Adaptive = true },
                _ => new LookInput { Configuration = $$"""{"trees":{{i}}}""", Score = (i % 100) / 100.0, Adaptive = i % 2 == 0 },
            };
        }).ToList();
    }

    [Fact]
    public void A_large_batch_leaves_the_rows_and_chain_that_single_looks_leave()
    {
        const int size = 40;
        var inputs = Inputs(3 * LookChain.Ahead + 5, size);
        using var batch = Bookkeeper.Create(_batch.Path, new StoppedClock());
        using var single = Bookkeeper.Create(_single.Path, new StoppedClock());
        foreach (var book in new[] { batch, single })
        {
            book.RegisterHoldout("v", TempLedger.Examples(size));
            // The guarded inputs release on the 'exact' stream: declare it on both ledgers first, so that neither the batch
            // (which declares the streams it opens before its looks) nor the single looks add a stream entry.
            book.RecordMany("v", [new LookInput { Configuration = "{}", Score = 0.5, Guard = GuardSpec.Exact }]);
        }

        batch.RecordMany("v", inputs);
        foreach (var input in inputs) single.RecordMany("v", [input]);

        var (a, b) = (batch.Store.Looks(batch.Holdout("v")), single.Store.Looks(single.Holdout("v")));
        Assert.Equal(inputs.Count + 1, a.Count);
        Assert.Equal(b, a);
        for (var i = 0; i < a.Count; i++) Assert.Equal(single.Store.LossBytes(single.Holdout("v"), i + 1), batch.Store.LossBytes(batch.Holdout("v"), i + 1));
        Assert.Equal(single.Store.ChainHead(), batch.Store.ChainHead());
        foreach (var book in new[] { batch, single })
        {
            var report = book.Verify();
            Assert.True(report.Valid, report.Problem);
            Assert.Equal(inputs.Count + 3, report.Entries);
        }
    }

    [Fact]
    public void A_failure_while_hashing_ahead_reaches_the_writer_and_nothing_is_written()
    {
        var looks = Enumerable.Range(0, LookChain.Ahead + 10).Select(i => new NewLook($$"""{"i":{{i}}}""", 0.5)).ToList();
        using var chain = new LookChain(looks, Chain.Genesis, (i, _) => i == 100 ? throw new IOException("disk gone") : [(byte)i]);
        for (var i = 0; i < 100; i++) Assert.Equal(Chain.HashSize, chain.Take(i).Hash.Length);
        Assert.Throws<IOException>(() => chain.Take(100));
    }
}
