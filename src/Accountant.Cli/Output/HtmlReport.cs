using System.Net;
using System.Text;
using Accountant.Bounds;
using Accountant.Statements;

namespace Accountant.Cli.Output;

/// <summary>
/// One self-contained HTML page: the statement, the plot as inline SVG, the tie set when known, the warnings and the
/// cautions. No scripts and no fetches; styles are inline; it reflows on a phone and prints on paper. Every number that
/// the JSON statement also carries sits in an element with a <c>data-field</c> attribute naming that field.
/// </summary>
public static class HtmlReport
{
    private const string Style = """
        :root { color-scheme: light; --ink: #1d2430; --muted: #5b6575; --rule: #d7dce3; --band: #f3f5f8; --accent: #0b5cad; --warn: #8a4b00; }
        * { box-sizing: border-box; }
        body { margin: 0; font: 16px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; color: var(--ink); background: #fff; }
        main { max-width: 60rem; margin: 0 auto; padding: 1.25rem; }
        h1 { font-size: 1.5rem; margin: 0 0 .25rem; }
        h2 { font-size: 1.15rem; margin: 1.75rem 0 .5rem; border-bottom: 1px solid var(--rule); padding-bottom: .25rem; }
        .lead { font-size: 1.1rem; background: var(--band); border-left: 4px solid var(--accent); padding: .75rem 1rem; }
        .meta { color: var(--muted); font-size: .9rem; }
        table { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
        th, td { text-align: left; padding: .4rem .5rem; border-bottom: 1px solid var(--rule); }
        td.num, th.num { text-align: right; }
        .figure { overflow-x: auto; }
        .figure svg { width: 100%; height: auto; max-width: 900px; }
        .warning { color: var(--warn); }
        code { font-family: ui-monospace, "SFMono-Regular", Menlo, monospace; font-size: .85em; word-break: break-all; }
        @media (max-width: 36rem) { body { font-size: 15px; } main { padding: .75rem; } th, td { padding: .3rem .25rem; } }
        @media print { main { max-width: none; } .figure svg { max-width: 100%; } h2 { break-after: avoid; } table, .figure { break-inside: avoid; } }
        """;

    private static string H(string text) => WebUtility.HtmlEncode(text);

    public static string Render(Statement s, string? svg, DateTimeOffset generated)
    {
        var h = s.Holdout;
        var metric = H(h.Metric.Name());
        var b = new StringBuilder();
        b.AppendLine("<!DOCTYPE html>");
        b.AppendLine("<html lang=\"en\"><head><meta charset=\"utf-8\">");
        b.AppendLine("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">");
        b.AppendLine($"<title>Accountant statement: {H(h.Name)}</title>");
        b.AppendLine($"<style>{Style}</style></head><body><main>");
        b.AppendLine($"<h1>Holdout <span data-field=\"holdout.name\">{H(h.Name)}</span></h1>");
        b.AppendLine($"<p class=\"meta\"><span data-field=\"holdout.size\">{Text.Count(h.Size)}</span> examples, metric {metric}; <span data-field=\"looks\">{Text.Count(s.Looks)}</span> looks counted (<span data-field=\"adaptiveLooks\">{Text.Count(s.AdaptiveLooks)}</span> adaptive, {Text.Count(s.VoidedLooks)} voided, {Text.Count(s.ScoreOnlyLooks)} score-only){(s.AdaptiveLooks > 0 ? $"; ln M<sub>eff</sub> = <span data-field=\"logEffectiveLooks\">{Text.N(s.LogEffectiveLooks, 2)}</span>" : "")}.</p>");
        if (s.Best is { } best && s.Primary is { } primary)
        {
            var direction = h.Metric.HigherIsBetter() ? "at least" : "at most";
            b.AppendLine($"<p class=\"lead\">Best look #<span data-field=\"best.look\">{best.Number}</span> observed {metric} <strong data-field=\"best.observed\">{Text.N(best.Score)}</strong>. With {H(Text.Percent(s.Options.Confidence))} confidence its true {metric} is {direction} <strong>{Text.N(primary.Bound)}</strong> ({H(primary.Method)}).</p>");
            b.AppendLine($"<p class=\"meta\">Configuration: <code>{H(best.Configuration)}</code></p>");
        }
        else
        {
            b.AppendLine("<p class=\"lead\">No selectable look yet.</p>");
        }

        b.AppendLine("<h2>Corrected bounds</h2>");
        var side = s.Options.Sided == Sidedness.OneSided ? "one-sided" : "two-sided";
        b.AppendLine($"<table><thead><tr><th>method</th><th class=\"num\">{(h.Metric.HigherIsBetter() ? "lower" : "upper")} bound ({H(Text.Percent(s.Options.Confidence))}, {side})</th><th class=\"num\">margin</th><th>kind</th><th>reference</th></tr></thead><tbody>");
        for (var i = 0; i < s.Bounds.Count; i++)
        {
            var line = s.Bounds[i];
            b.AppendLine($"<tr><td>{H(line.Method)}{(line.Tightest ? " <em>(tightest)</em>" : "")}</td><td class=\"num\" data-field=\"bounds[{i}].bound\">{Text.N(line.Bound)}</td><td class=\"num\" data-field=\"bounds[{i}].margin\">{Text.N(line.Margin)}</td><td>{(line.Guarantee ? "guarantee" : "estimate")}</td><td class=\"meta\">{H(line.Reference)}</td></tr>");
        }

        foreach (var estimate in s.Estimates)
        {
            b.AppendLine($"<tr><td>{H(estimate.Method)}</td><td class=\"num\">{Text.N(estimate.Bound)}</td><td class=\"num\">{Text.N(estimate.Margin)}</td><td>estimate</td><td class=\"meta\">{H(estimate.Reference)}</td></tr>");
        }

        b.AppendLine("</tbody></table>");
        if (s.Split is { } split && s.Primary is { } tightest)
        {
            // The tightest margin as two bars: what one look's sampling costs, and what the comparisons add.
            var whole = Math.Max(tightest.Margin, 1e-12);
            var samplingShare = Math.Clamp(split.Sampling / whole, 0, 1) * 100;
            b.AppendLine("<h2>What the margin cost</h2>");
            b.AppendLine($"<div role='img' aria-label='margin split' style='display:flex;height:1.25rem;border:1px solid var(--rule);max-width:40rem'><div style='width:{samplingShare.ToString("0.#", System.Globalization.CultureInfo.InvariantCulture)}%;background:var(--accent)'></div><div style='flex:1;background:var(--band)'></div></div>");
            b.AppendLine($"<p>Margin {Text.N(tightest.Margin)} = <span data-field='marginSplit.sampling'>{Text.N(split.Sampling)}</span> for sampling alone ({H(split.SamplingMethod)} with one look, dark) + <span data-field='marginSplit.comparisons'>{Text.N(split.Comparisons)}</span> for the comparisons (light).</p>");
        }

        foreach (var sentence in StatementWriter.MarginSentences(s).Skip(s.Split is null ? 0 : 1))
        {
            b.AppendLine($"<p class=\"meta\">{H(sentence)}</p>");
        }

        var budget = s.Budget;
        b.AppendLine($"<p>Budget at tolerance <span data-field=\"budget.tolerance\">{Text.N(budget.Tolerance, 3)}</span>: <span data-field=\"budget.looksLeft\">{Text.Count(budget.LooksLeft)}</span> look(s) left of {Text.Count(budget.MaxLooks)} ({H(budget.Method)}).</p>");

        if (svg is not null)
        {
            b.AppendLine("<h2>Looks, best score and bounds</h2>");
            b.AppendLine($"<div class=\"figure\" role=\"img\" aria-label=\"best observed {metric} and corrected bounds against the number of looks\">{svg}</div>");
        }

        if (s.Winner is { Unavailable: null } winner)
        {
            b.AppendLine("<h2>Tied with the best</h2>");
            b.AppendLine($"<p>Looks that McNemar's exact test with Holm's step-down cannot tell from the best at level {Text.N(winner.Alpha, 3)}: <span data-field=\"winner.tiedWithBest\">{string.Join(", ", winner.TiedWithBest.Select(n => "#" + n))}</span>.</p>");
            b.AppendLine($"<p class=\"meta\">{H(Comparisons.WinnerTestResult.SelectionCaution)}</p>");
        }

        if (s.Warnings.Count > 0)
        {
            b.AppendLine("<h2>Warnings</h2><ul>");
            foreach (var w in s.Warnings) b.AppendLine($"<li class=\"warning\"><strong data-field=\"warnings.code\">{H(w.Code)}</strong>: {H(w.Message)}</li>");
            b.AppendLine("</ul>");
        }

        b.AppendLine("<h2>Cautions</h2><ul>");
        foreach (var c in s.Cautions) b.AppendLine($"<li>{H(c)}</li>");
        b.AppendLine("</ul>");
        b.AppendLine($"<p class=\"meta\">Chain head <code data-field=\"chainHead\">{H(s.ChainHead ?? "")}</code>; check it with <code>accountant verify --head HASH</code>. Generated {generated.UtcDateTime.ToString("yyyy-MM-dd HH:mm 'UTC'", System.Globalization.CultureInfo.InvariantCulture)}.</p>");
        b.AppendLine("</main></body></html>");
        return b.ToString();
    }
}
