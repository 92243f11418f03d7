using System.Diagnostics;

namespace Accountant.Search;

/// <summary>
/// Where a search's wall time went: reading and splitting the data, building the ML.NET views, training and predicting,
/// the accounting (the ledger's writes and reads: the holdout, every look, a shared plan's claims, and the statement with
/// its bounds), and saving the selected model. Measured on the search's own thread, so the parts add up to about the whole.
/// </summary>
public sealed class SearchTimings
{
    private readonly Stopwatch _total = Stopwatch.StartNew();

    public TimeSpan Reading { get; private set; }

    public TimeSpan Featurizing { get; private set; }

    public TimeSpan Training { get; private set; }

    public TimeSpan Accounting { get; private set; }

    public TimeSpan Saving { get; private set; }

    /// <summary>From the start of the search to now (or to its end, once it has ended).</summary>
    public TimeSpan Total => _total.Elapsed;

    internal void Stop() => _total.Stop();

    internal T Read<T>(Func<T> work) => Add(work, t => Reading += t);

    internal T Featurize<T>(Func<T> work) => Add(work, t => Featurizing += t);

    internal T Train<T>(Func<T> work) => Add(work, t => Training += t);

    internal T Account<T>(Func<T> work) => Add(work, t => Accounting += t);

    internal void Save(Action work) => Add(() => { work(); return 0; }, t => Saving += t);

    private static T Add<T>(Func<T> work, Action<TimeSpan> add)
    {
        var watch = Stopwatch.StartNew();
        try
        {
            return work();
        }
        finally
        {
            add(watch.Elapsed);
        }
    }
}
