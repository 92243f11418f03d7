namespace Accountant.Ledger;

/// <summary>
/// The configuration digest, canonical entry and chain hash of each look of a batch, in order. For a large batch a
/// worker thread computes them ahead of the caller, which meanwhile writes the rows already linked, so hashing and
/// database writes overlap on two cores; a small batch is computed in place. The hashes are the same either way:
/// each covers the previous one, so they are always computed one after the other.
/// </summary>
internal sealed class LookChain : IDisposable
{
    /// <summary>Batches at least this large get a worker thread.</summary>
    public const int Ahead = 256;

    private readonly Func<int, string, byte[]> _entry;
    private readonly IReadOnlyList<NewLook> _looks;
    private readonly string[] _digests;
    private readonly byte[][] _hashes;
    private readonly Task? _worker;
    private byte[] _previous;
    private int _ready;
    private volatile bool _stop;

    /// <param name="entry">The canonical entry bytes of look i given its configuration digest.</param>
    public LookChain(IReadOnlyList<NewLook> looks, byte[] previous, Func<int, string, byte[]> entry)
    {
        _looks = looks;
        _previous = previous;
        _entry = entry;
        _digests = new string[looks.Count];
        _hashes = new byte[looks.Count][];
        if (looks.Count >= Ahead) _worker = Task.Factory.StartNew(() => { while (!_stop && _ready < _looks.Count) Next(); }, TaskCreationOptions.LongRunning);
    }

    /// <summary>Look i's digest and chain hash; waits for the worker when it has not got that far.</summary>
    public (string Digest, byte[] Hash) Take(int i)
    {
        if (_worker is null)
        {
            while (_ready <= i) Next();
        }
        else if (Volatile.Read(ref _ready) <= i)
        {
            var spin = new SpinWait();
            while (Volatile.Read(ref _ready) <= i)
            {
                if (_worker.IsCompleted)
                {
                    _worker.GetAwaiter().GetResult(); // rethrows what stopped it
                    if (Volatile.Read(ref _ready) <= i) throw new InvalidOperationException("the look chain stopped early");
                }

                spin.SpinOnce();
            }
        }

        return (_digests[i], _hashes[i]);
    }

    private void Next()
    {
        var i = _ready;
        var digest = ConfigurationJson.Digest(_looks[i].Configuration);
        var hash = Chain.Link(_previous, _entry(i, digest));
        (_digests[i], _hashes[i], _previous) = (digest, hash, hash);
        Volatile.Write(ref _ready, i + 1);
    }

    /// <summary>Stops the worker and waits for it, so that nothing runs on after the batch's transaction.</summary>
    public void Dispose()
    {
        _stop = true;
        try
        {
            _worker?.Wait();
        }
        catch (AggregateException)
        {
            // Already reported by Take, or irrelevant once the batch failed for another reason.
        }
    }
}
