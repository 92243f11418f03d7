using Accountant.Ledger;
using Accountant.Statements;
using ScottPlot;
using SkiaSharp;

namespace Accountant.Search.Plots;

/// <summary>
/// The picture of a holdout's history, drawn with ScottPlot: against the number of looks, the best observed score so far,
/// the corrected bound of each guaranteed method at that count, and any test-set openings; below, the share of the budget
/// used. PNG or SVG by the file's extension.
/// </summary>
public static class StatementPlot
{
    public const int Width = 900;
    public const int Height = 700;
    private const int MaxPoints = 200;

    public static void CheckPath(string path)
    {
        var extension = Path.GetExtension(path).ToLowerInvariant();
        if (extension is not (".png" or ".svg"))
        {
            throw AccountantException.BadArguments($"the plot file '{path}' must end in .png or .svg.");
        }

        var folder = Path.GetDirectoryName(Path.GetFullPath(path));
        if (folder is not null && !Directory.Exists(folder))
        {
            throw AccountantException.BadArguments($"the folder of the plot file '{path}' does not exist; create it first.");
        }
    }

    /// <summary>The series drawn: one point per prefix of the looks (at most 200 prefixes, evenly spread).</summary>
    public sealed record Series(double[] Looks, double[] Best, IReadOnlyDictionary<string, double[]> Bounds, double[] BudgetUsed, IReadOnlyList<(double Looks, double Test)> Openings);

    public static Series Compute(Bookkeeper book, string holdoutName, StatementOptions options)
    {
        var holdout = book.Holdout(holdoutName);
        var looks = book.Store.Looks(holdout);
        var voids = book.Store.Voids(holdout);
        if (looks.Count == 0)
        {
            throw AccountantException.BadArguments($"holdout '{holdout.Name}' has no looks to plot yet.");
        }

        var inputs = book.Inputs(holdout);
        var counts = Enumerable.Range(0, Math.Min(MaxPoints, looks.Count)).Select(i => (int)Math.Round(1 + i * (looks.Count - 1.0) / Math.Max(1, Math.Min(MaxPoints, looks.Count) - 1))).Distinct().ToList();
        var best = new List<double>();
        var used = new List<double>();
        var bounds = new Dictionary<string, List<double>>();
        var x = new List<double>();
        foreach (var m in counts)
        {
            var prefix = looks.Take(m).ToList();
            var statement = StatementBuilder.Build(holdout, prefix, voids.Where(v => v.LookNumber <= m).ToList(), null, options, inputs with { Openings = [] });
            if (statement.Best is null) continue;
            x.Add(m);
            best.Add(statement.Best.Score);
            used.Add(statement.Budget.MaxLooks == 0 ? 100.0 : Math.Min(1000.0, 100.0 * Math.Exp(statement.LogEffectiveLooks) / statement.Budget.MaxLooks));
            foreach (var line in statement.Bounds.Where(b => b.Guarantee))
            {
                if (!bounds.TryGetValue(line.Method, out var list)) bounds[line.Method] = list = Enumerable.Repeat(double.NaN, x.Count - 1).ToList();
                list.Add(line.Bound);
            }

            foreach (var list in bounds.Values.Where(l => l.Count < x.Count)) list.Add(double.NaN);
        }

        var openings = (inputs.Openings ?? []).Select(o => ((double)looks.Count(l => l.Sequence < o.Sequence), o.TestScore)).ToList();
        return new Series([.. x], [.. best], bounds.ToDictionary(b => b.Key, b => b.Value.ToArray()), [.. used], openings);
    }

    public static void Write(Bookkeeper book, string holdoutName, string path, StatementOptions options)
    {
        CheckPath(path);
        var holdout = book.Holdout(holdoutName);
        var series = Compute(book, holdoutName, options);
        var multiplot = new Multiplot();
        multiplot.AddPlots(2);
        var top = multiplot.GetPlot(0);
        var metric = holdout.Metric.Name();
        var observed = top.Add.ScatterLine(series.Looks, series.Best);
        observed.LegendText = $"best observed {metric}";
        observed.LineWidth = 2;
        observed.ConnectStyle = ConnectStyle.StepHorizontal;
        foreach (var (method, values) in series.Bounds)
        {
            var line = top.Add.ScatterLine(series.Looks, values);
            line.LegendText = $"{method} ({options.Confidence * 100:0.#}%)";
            line.LinePattern = LinePattern.Dashed;
            line.LineWidth = 1.5f;
        }

        if (series.Openings.Count > 0)
        {
            var test = top.Add.ScatterPoints(series.Openings.Select(o => o.Looks).ToArray(), series.Openings.Select(o => o.Test).ToArray());
            test.LegendText = $"test {metric} (each opening)";
            test.MarkerSize = 10;
            test.MarkerShape = MarkerShape.FilledDiamond;
        }

        top.Title($"{holdout.Name}: best {metric} and corrected bounds");
        top.YLabel(metric);
        top.XLabel("looks");
        top.ShowLegend(Alignment.UpperRight);

        var bottom = multiplot.GetPlot(1);
        var budget = bottom.Add.ScatterLine(series.Looks, series.BudgetUsed);
        budget.LegendText = $"budget used at tolerance {options.Tolerance:0.###} (%)";
        budget.LineWidth = 2;
        bottom.Add.HorizontalLine(100, 1, Colors.Gray, LinePattern.Dotted);
        bottom.YLabel("budget used (%)");
        bottom.XLabel("looks");
        bottom.ShowLegend(Alignment.UpperLeft);

        Save(path, Width, Height, (canvas, rect) => multiplot.Render(canvas, rect), () => multiplot.SavePng(path, Width, Height));
    }

    /// <summary>Writes a picture as SVG (by the file's extension) through <paramref name="render"/>, else as PNG.</summary>
    internal static void Save(string path, int width, int height, Action<SKCanvas, PixelRect> render, Action png)
    {
        if (!Path.GetExtension(path).Equals(".svg", StringComparison.OrdinalIgnoreCase))
        {
            png();
            return;
        }

        using var stream = File.Create(path);
        using var canvas = SKSvgCanvas.Create(new SKRect(0, 0, width, height), stream);
        render(canvas, new PixelRect(0, width, height, 0));
    }
}
