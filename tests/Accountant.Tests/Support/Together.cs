using System.Collections.Concurrent;

namespace Accountant.Tests.Support;

/// <summary>Runs bodies on threads of their own that start together (behind a barrier), as concurrent workers do.</summary>
public static class Together
{
    /// <summary>Runs <paramref name="body"/>(0 … count − 1) on <paramref name="count"/> threads released at once; rethrows what any of them threw.</summary>
    public static void Run(int count, Action<int> body)
    {
        var errors = new ConcurrentBag<Exception>();
        using var start = new Barrier(count);
        var threads = Enumerable.Range(0, count).Select(i => new Thread(() =>
        {
            try
            {
                start.SignalAndWait(TimeSpan.FromSeconds(60));
                body(i);
            }
            catch (Exception e)
            {
                errors.Add(e);
            }
        })).ToList();
        threads.ForEach(t => t.Start());
        threads.ForEach(t => t.Join());
        if (!errors.IsEmpty) throw new AggregateException(errors);
    }
}
