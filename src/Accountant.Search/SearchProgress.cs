namespace Accountant.Search;

/// <summary>Where a search is: looks done of the total, the best score so far, time spent and an estimate of time left.</summary>
public sealed record SearchProgress(int Done, int Total, double? Best, TimeSpan Elapsed, string Current)
{
    /// <summary>While the data is read, before any look: the share of the current pass done (0 to 1); <see cref="Current"/> says which.</summary>
    public double? Reading { get; init; }

    /// <summary>Time left at the mean pace so far; null before the first look finishes.</summary>
    public TimeSpan? Remaining => Done == 0 ? null : TimeSpan.FromTicks(Elapsed.Ticks / Done * (Total - Done));
}
