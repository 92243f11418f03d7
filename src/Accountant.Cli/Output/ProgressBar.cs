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

    public void Report(SearchProgress p)
    {
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
}
