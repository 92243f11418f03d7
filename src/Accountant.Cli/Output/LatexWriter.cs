using System.Text;
using Accountant.Bounds;
using Accountant.Statements;

namespace Accountant.Cli.Output;

/// <summary>
/// A statement for a paper: a LaTeX table of the corrected bounds and a one-paragraph methods statement (how many
/// configurations and looks were compared on how many validation examples, the observed best, the corrected bound
/// with its confidence, the method with its citation, and the assumptions). Names are escaped; only the standard
/// table environment is used, so it compiles without extra packages.
/// </summary>
public static class LatexWriter
{
    /// <summary>Escapes text for LaTeX's text mode.</summary>
    public static string Escape(string text)
    {
        var b = new StringBuilder(text.Length);
        foreach (var c in text)
        {
            b.Append(c switch
            {
                '\\' => @"\textbackslash{}",
                '{' => @"\{",
                '}' => @"\}",
                '_' => @"\_",
                '%' => @"\%",
                '&' => @"\&",
                '#' => @"\#",
                '$' => @"\$",
                '~' => @"\textasciitilde{}",
                '^' => @"\textasciicircum{}",
                '<' => @"\textless{}",
                '>' => @"\textgreater{}",
                _ => c.ToString(),
            });
        }

        return b.ToString();
    }

    public static string Render(Statement s)
    {
        var h = s.Holdout;
        var metric = h.Metric.Name();
        var percent = Escape(Text.Percent(s.Options.Confidence));
        var side = s.Options.Sided == Sidedness.OneSided ? "one-sided" : "two-sided";
        var word = h.Metric.HigherIsBetter() ? "Lower bound" : "Upper bound";
        var b = new StringBuilder();
        b.AppendLine($"% Accountant statement for holdout {Escape(h.Name)}; chain head {s.ChainHead ?? "(empty)"}");
        b.AppendLine(@"\begin{table}[ht]");
        b.AppendLine(@"\centering");
        b.AppendLine(@"\begin{tabular}{lrrl}");
        b.AppendLine(@"\hline");
        b.AppendLine($@"Method & {word} ({percent}, {side}) & Margin & Kind \\");
        b.AppendLine(@"\hline");
        foreach (var line in s.Bounds)
        {
            b.AppendLine($@"{Escape(line.Method)} & {Text.N(line.Bound)} & {Text.N(line.Margin)} & {(line.Guarantee ? "guarantee" : "estimate")}{(line.Tightest ? ", tightest" : "")} \\");
        }

        b.AppendLine(@"\hline");
        b.AppendLine(@"\end{tabular}");
        var best = s.Best is { } look ? $"Best validation {Escape(metric)} {Text.N(look.Score)} (look {look.Number} of {Text.Count(s.Looks)})" : "No selectable look";
        b.AppendLine($@"\caption{{{best} on holdout \texttt{{{Escape(h.Name)}}} ({Text.Count(h.Size)} examples), with bounds corrected for {(s.AdaptiveLooks > 0 ? "every look the released scores could have led to" : $"{Text.Count(s.Looks)} looks")}.}}");
        b.AppendLine(@"\end{table}");
        b.AppendLine();
        b.AppendLine(Paragraph(s));
        return b.ToString();
    }

    private static string Paragraph(Statement s)
    {
        var h = s.Holdout;
        var metric = Escape(h.Metric.Name());
        var configurations = s.Best is null ? 0 : s.Looks;
        var text = new StringBuilder();
        text.Append($"We compared {Text.Count(configurations)} scored looks at configurations");
        text.Append(s.AdaptiveLooks > 0 ? $" ({Text.Count(s.AdaptiveLooks)} of them chosen adaptively from earlier released scores)" : " fixed before any score was seen");
        text.Append($" on a validation set of {Text.Count(h.Size)} examples, counting every look, including reruns, partial-budget stages and voided looks. ");
        if (s.Best is { } best && s.Primary is { } primary)
        {
            var direction = h.Metric.HigherIsBetter() ? "at least" : "at most";
            text.Append($"The best observed {metric} was {Text.N(best.Score)}; with {Escape(Text.Percent(s.Options.Confidence))} confidence the selected configuration's true {metric} is {direction} {Text.N(primary.Bound)} ");
            text.Append($"({Escape(primary.Method)}: {Escape(primary.Reference)}). ");
        }

        if (s.AdaptiveLooks > 0)
        {
            text.Append($"Adaptive looks were accounted for by a union bound over every look the released values could have led to, $\\ln M_{{\\mathrm{{eff}}}} = {Text.N(s.LogEffectiveLooks, 2)}$. ");
        }

        if (s.Split is { } split && s.Primary is { } tightest)
        {
            text.Append($"Of the margin {Text.N(tightest.Margin)}, {Text.N(split.Sampling)} is what sampling {Text.Count(h.Size)} examples costs for a single configuration ({Escape(split.SamplingMethod)} with one look) and {Text.N(split.Comparisons)} what the comparisons cost. ");
        }

        if (s.EffectiveComparisons is { } effective)
        {
            text.Append($"Because the configurations share most of their mistakes, the correlation-aware bound is as tight as a union bound over {Text.N(effective, 1)} of the {Text.Count(s.Looks)} looks would be. ");
        }

        text.Append("The bound assumes the validation examples are independent draws from the population of interest and that every look at them was recorded; it does not address distribution shift and does not replace an untouched test set.");
        return text.ToString();
    }
}
