using Accountant.Search;

namespace Accountant.Cli.Output;

/// <summary>
/// A one-line progress bar on stderr: looks done, best so far, elapsed and estimated time left. On a terminal it
/// redraws in place; when stderr is a file or a pipe it writes a plain line at every tenth of the work instead.
/// </summary>
internal sealed class ProgressBar(TextWriter error, bool terminal, string metric) : IProgress<SearchProgress>
{
    private const int Width = 24;
    private int _lastTenth = -1;

    private string? _reading;

    public void Report(SearchProgress p)
    {
        if (p.Reading is { } share)
        {
            Reading(p, share);
            return;
        }


        var filled = p.Total == 0 ? Width : p.Done * Width / p.Total;
        var best = p.Best is { } b ? $"best {metric} {Text.N(b)}" : "best –";
        var left = p.Remaining is { } r ? Text.Duration(r) : "–";
        var line = $"[{new string('#', filled)}{new string('.', Width - filled)}] {p.Done}/{p.Total} looks  {best}  elapsed {Text.Duration(p.Elapsed)}  left {left}  {(p.Done < p.Total ? p.Current : "")}";
        if (terminal)
        {
            error.Write("\r" + line.PadRight(110));
            if (p.Done == p.Total) error.WriteLine();
        }
        else
        {
            var tenth = p.Total == 0 ? 10 : p.Done * 10 / p.Total;
            if (tenth != _lastTenth)
            {
                _lastTenth = tenth;
                error.WriteLine(line.TrimEnd());
            }
        }

        error.Flush();
    }

    /// <summary>A pass over the data: its share done, redrawn in place on a terminal, else a line at every tenth of each pass.</summary>
    private void Reading(SearchProgress p, double share)
    {
        var filled = (int)(Math.Clamp(share, 0, 1) * Width);
        var line = $"[{new string('#', filled)}{new string('.', Width - filled)}] {share * 100,3:0}%  elapsed {Text.Duration(p.Elapsed)}  {p.Current}";
        var tenth = $"{p.Current} {(int)(share * 10)}";
        if (terminal)
        {
            error.Write("\r" + line.PadRight(110));
            if (share >= 1) error.WriteLine();
        }
        else if (tenth != _reading)
        {
            _reading = tenth;
            error.WriteLine(line);
        }

        error.Flush();
    }
}
