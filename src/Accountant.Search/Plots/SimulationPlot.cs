using Accountant.Simulation;
using ScottPlot;

namespace Accountant.Search.Plots;

/// <summary>
/// A simulation's result as a picture: each method's mean margin as a multiple of the oracle margin (a bar per method; the
/// dotted line at 1 is the oracle, as tight as the scenario allows), each labelled with its coverage. PNG or SVG.
/// </summary>
public static class SimulationPlot
{
    public const int Width = 900;
    public const int Height = 480;

    public static void Write(SimulationResult result, string path)
    {
        StatementPlot.CheckPath(path);
        var plot = new Plot();
        var methods = result.Methods.Where(m => double.IsFinite(m.MarginToOracle)).ToList();
        var bars = methods.Select((m, i) => new Bar
        {
            Position = methods.Count - 1 - i,
            Value = m.MarginToOracle,
            FillColor = m.Selection ? Colors.Gray : m.ValidHere ? Colors.SteelBlue : Colors.LightSalmon,
            Label = $"{m.MarginToOracle:0.00}×, covers {m.Coverage:0.000}",
        }).ToList();
        var barPlot = plot.Add.Bars(bars);
        barPlot.Horizontal = true;
        barPlot.ValueLabelStyle.FontSize = 12;
        plot.Add.VerticalLine(1, 1.5f, Colors.Black, LinePattern.Dotted);
        plot.Axes.Left.SetTicks(
            methods.Select((_, i) => (double)(methods.Count - 1 - i)).ToArray(),
            methods.Select(m => m.Method + (m.Selection ? " (smallest per search)" : m.ValidHere ? "" : " (not valid here)")).ToArray());
        var o = result.Options;
        plot.Title($"{o.Strategy.ToString().ToLowerInvariant()}, {o.Looks:#,0} looks, {o.HoldoutSize:#,0} examples, correlation {o.Correlation:0.##}, {o.Repetitions:#,0} searches", size: 14);
        plot.XLabel($"mean margin / oracle margin {result.OracleMargin:0.0000} (dotted line: the oracle)", size: 13);
        plot.Axes.SetLimits(0, Math.Max(2.0, methods.Count == 0 ? 2.0 : methods.Max(m => m.MarginToOracle) * 1.6), -0.6, methods.Count - 0.4);
        StatementPlot.Save(path, Width, Height, (canvas, rect) => plot.Render(canvas, rect), () => plot.SavePng(path, Width, Height));
    }
}
