namespace Accountant.Cli;

/// <summary>
/// Whether a command is running that stops cleanly on Ctrl-C (finishing the look in progress). Only then does the
/// first Ctrl-C become a cancellation request; at any other time it ends the process as usual.
/// </summary>
public static class CtrlC
{
    private static int _observers;

    public static bool Observed => Volatile.Read(ref _observers) > 0;

    public static IDisposable Observe()
    {
        Interlocked.Increment(ref _observers);
        return new Scope();
    }

    private sealed class Scope : IDisposable
    {
        private int _disposed;

        public void Dispose()
        {
            if (Interlocked.Exchange(ref _disposed, 1) == 0) Interlocked.Decrement(ref _observers);
        }
    }
}
