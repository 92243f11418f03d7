using Accountant.Tests.Support;

namespace Accountant.Tests.Ledger;

public sealed class ConcurrencyTests
{
    [Theory]
    [InlineData(Backend.Sqlite)]
    [InlineData(Backend.Postgres)]
    public void Concurrent_writers_on_separate_connections_get_unique_gapless_numbers_and_a_valid_chain(Backend backend)
    {
        using var _temp = new TempLedger(backend);
        const int writers = 4, looksEach = 40;
        using (var book = _temp.Create())
        {
            book.RegisterHoldout("validation", TempLedger.Examples(64));
        }

        var acknowledged = new System.Collections.Concurrent.ConcurrentBag<(int Writer, int Number, string Configuration)>();
        var threads = Enumerable.Range(0, writers).Select(w => new Thread(() =>
        {
            using var book = _temp.Open();
            for (var i = 0; i < looksEach; i++)
            {
                var configuration = $"{{\"writer\":{w},\"i\":{i}}}";
                var look = book.Record("validation", configuration, (w * looksEach + i) / 1000.0);
                acknowledged.Add((w, look.Number, look.Configuration));
            }
        })).ToList();
        threads.ForEach(t => t.Start());
        threads.ForEach(t => t.Join());

        using var reader = _temp.Open();
        var looks = reader.Store.Looks(reader.Holdout("validation"));
        Assert.Equal(Enumerable.Range(1, writers * looksEach), looks.Select(l => l.Number));
        Assert.Equal(writers * looksEach, acknowledged.Count);
        // Every acknowledged look is present exactly once, under the number it was told.
        var stored = looks.ToDictionary(l => l.Number, l => l.Configuration);
        Assert.All(acknowledged, a => Assert.Equal(a.Configuration, stored[a.Number]));
        Assert.Equal(writers * looksEach, stored.Values.Distinct().Count());
        Assert.True(reader.Verify().Valid);
    }
}
