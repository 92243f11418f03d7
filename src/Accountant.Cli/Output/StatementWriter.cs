using System.Text;
using System.Text.Encodings.Web;
using System.Text.Json;
using Accountant.Bounds;
using Accountant.Statements;

namespace Accountant.Cli.Output;

/// <summary>Renders a statement as a table for people, JSON for machines, or Markdown for pull requests and papers.</summary>
public static class StatementWriter
{
    /// <summary>The version of the JSON output's shape; bumped when a field other tools rely on changes.</summary>
    public const int JsonSchemaVersion = 1;

    private static readonly JsonWriterOptions JsonOptions = new() { Indented = true, Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping };

    public static string Render(Statement statement, string format) => format switch
    {
        "json" => Json(statement),
        "markdown" => Markdown(statement),
        "latex" => LatexWriter.Render(statement),
        _ => Table(statement),
    };

    private static string Kind(BoundLine line) => line.Guarantee ? "guarantee" : "estimate";

    /// <summary>M_eff for people: a count while it fits, else a power of ten.</summary>
    private static string EffectiveText(Statement s) =>
        s.LogEffectiveLooks < 30 ? Text.Count((long)Math.Round(Math.Exp(s.LogEffectiveLooks)))
        : "10^" + (s.LogEffectiveLooks / Math.Log(10)).ToString("0.#", System.Globalization.CultureInfo.InvariantCulture);

    private static string Side(Statement s) => s.Options.Sided == Sidedness.OneSided ? "one-sided" : "two-sided";

    private static string BoundWord(Statement s) => s.Holdout.Metric.HigherIsBetter() ? "lower bound" : "upper bound";

    public static string Table(Statement s)
    {
        var b = new StringBuilder();
        var h = s.Holdout;
        b.AppendLine($"Holdout      {h.Name}: {Text.Count(h.Size)} examples, metric {h.Metric.Name()}");
        b.AppendLine($"Looks        {Text.Count(s.Looks)} counted ({Text.Count(s.AdaptiveLooks)} adaptive, {Text.Count(s.VoidedLooks)} voided, {Text.Count(s.ScoreOnlyLooks)} score-only)");
        if (s.AdaptiveLooks > 0)
        {
            b.AppendLine($"Effective    ln M_eff = {Text.N(s.LogEffectiveLooks, 2)} (M_eff ≈ {EffectiveText(s)}): every look the guards' possible releases could have led to");
        }
        if (s.Best is { } best)
        {
            b.AppendLine($"Best look    #{best.Number}: {h.Metric.Name()} {Text.N(best.Score)}  {Text.Short(best.Configuration, 90)}");
        }

        b.AppendLine($"Confidence   {Text.Percent(s.Options.Confidence)} {Side(s)}, corrected for {(s.AdaptiveLooks > 0 ? EffectiveText(s) + " effective" : Text.Count(s.Looks))} look(s)");
        if (s.Bounds.Count > 0)
        {
            b.AppendLine();
            b.AppendLine($"  {"method",-26} {BoundWord(s),12} {"margin",8}  kind");
            foreach (var line in s.Bounds)
            {
                var value = s.Options.Sided == Sidedness.TwoSided ? $"[{Text.N(line.Lower)}, {Text.N(line.Upper)}]" : Text.N(line.Bound);
                b.AppendLine($"  {line.Method,-26} {value,12} {Text.N(line.Margin),8}  {Kind(line)}{(line.Tightest ? ", tightest" : "")}");
            }

            foreach (var line in s.Estimates)
            {
                var value = s.Options.Sided == Sidedness.TwoSided ? $"[{Text.N(line.Lower)}, {Text.N(line.Upper)}]" : Text.N(line.Bound);
                b.AppendLine($"  {line.Method,-18} {value,12} {Text.N(line.Margin),8}  {EstimateKind(line)}");
            }

            b.AppendLine();
            var primary = s.Primary!;
            var direction = h.Metric.HigherIsBetter() ? "at least" : "at most";
            b.AppendLine($"  With {Text.Percent(s.Options.Confidence)} confidence the selected configuration's true {h.Metric.Name()} is {direction} {Text.N(primary.Bound)} ({primary.Method}).");
            foreach (var sentence in MarginSentences(s)) b.AppendLine($"  {sentence}");
        }

        EstimatesTable(b, s);
        WinnerTable(b, s);

        b.AppendLine();
        b.AppendLine(s.Budget.MaxLooks == 0
            ? $"Budget       none: even one look's margin exceeds tolerance {Text.N(s.Budget.Tolerance, 3)} on {Text.Count(h.Size)} examples ({s.Budget.Method}); 'accountant plan' gives the size needed"
            : $"Budget       {Text.Count(s.Budget.LooksLeft)} look(s) left of {Text.Count(s.Budget.MaxLooks)} at tolerance {Text.N(s.Budget.Tolerance, 3)} ({s.Budget.Method})");
        b.AppendLine($"Chain head   {s.ChainHead ?? "(empty ledger)"}");
        if (s.Warnings.Count > 0)
        {
            b.AppendLine();
            b.AppendLine("Warnings");
            foreach (var w in s.Warnings) b.AppendLine($"  {w.Code}: {w.Message}");
        }

        b.AppendLine();
        b.AppendLine("Cautions");
        foreach (var c in s.Cautions) b.AppendLine($"  - {c}");
        return b.ToString();
    }

    /// <summary>What the tightest margin is made of, the effective number of comparisons, the anchors, and why the
    /// correlation-aware guarantee is missing when it is: the same sentences in every format.</summary>
    public static IEnumerable<string> MarginSentences(Statement s)
    {
        if (s.Split is { } split && s.Primary is { } primary)
        {
            yield return $"Margin {Text.N(primary.Margin)} = {Text.N(split.Sampling)} for sampling {Text.Count(s.Holdout.Size)} examples (one look: {split.SamplingMethod} with M = 1) + {Text.N(split.Comparisons)} for comparing the looks ({primary.Method}).";
        }

        if (s.EffectiveComparisons is { } effective)
        {
            yield return $"Effective comparisons: {Text.N(effective, 1)} of {Text.Count(s.Looks)} looks: the looks' shared mistakes make {ChainedBinomial.Name} as tight as a union bound over {Text.N(effective, 1)} looks would be.";
        }

        if (s.AnchorUsed is { } used && s.Bounds.Any(b => b.Method == ChainedBinomial.Name))
        {
            // The anchor that gave the bound (the full list is in the JSON statement's anchors).
            var of = s.Anchors.Count == 1 ? "its only anchor" : $"the best of {Text.Count(s.Anchors.Count)} anchors";
            yield return $"{ChainedBinomial.Name} chains through the majority vote of {(used.Name == "all" ? "every look" : used.Name)} ({Text.Count(used.Members)} looks, {Text.Count(used.Errors)} errors; the selected look errs alone on {Text.Count(used.OnlyLook)} examples and is right alone on {Text.Count(used.OnlyAnchor)}), {of}.";
        }

        if (s.CorrelationNote is { Length: > 0 } note) yield return note;
    }

    private static string EstimateKind(EstimateLine line) => line.Asymptotic ? "estimate, asymptotic" : "estimate";

    private static string EstimateHeader(Statement s, EstimateLine line) =>
        $"Estimates, not guarantees: {Text.Count(line.Resamples)} bootstrap resamples (seed {line.Seed}) of the {Text.Count(line.Looks)} looks with per-example losses";

    private static IEnumerable<string> EstimateSentences(Statement s)
    {
        var metric = s.Holdout.Metric.Name();
        foreach (var line in s.Estimates)
        {
            if (line.Method == PerExampleMethods.BootstrapBias && s.Best is { } best)
            {
                var side = s.Options.Sided == Sidedness.TwoSided
                    ? $"{Text.Percent(s.Options.Confidence)} percentile interval [{Text.N(line.Lower)}, {Text.N(line.Upper)}]"
                    : $"{Text.Percent(s.Options.Confidence)} percentile {(s.Holdout.Metric.HigherIsBetter() ? "lower" : "upper")} end {Text.N(line.Bound)}";
                yield return $"{line.Method}: the selected configuration's {metric} corrected for selection is {Text.N(line.Estimate ?? double.NaN)} (observed {Text.N(best.Score)}, optimism {Text.N(Math.Abs((line.Estimate ?? double.NaN) - best.Score))}); {side}.";
            }
            else if (line.Method == PerExampleMethods.MaxBootstrap)
            {
                yield return $"{line.Method}: simultaneous over all {Text.Count(line.Looks)} looks, {Text.N(line.CriticalValue ?? double.NaN, 3)} standard errors from each observed score; asymptotic, so its coverage is approximate for small holdouts.";
            }
        }

        if (s.EstimatesNote is { } note) yield return note;
    }

    private static void EstimatesTable(StringBuilder b, Statement s)
    {
        if (!s.Options.Estimates) return;
        b.AppendLine();
        b.AppendLine(s.Estimates.Count > 0 ? EstimateHeader(s, s.Estimates[0]) : "Estimates, not guarantees: not available");
        foreach (var sentence in EstimateSentences(s)) b.AppendLine($"  {sentence}");
    }

    private static IEnumerable<string> WinnerSentences(Statement s)
    {
        if (s.Winner is not { } w) yield break;
        if (w.Unavailable is { } why)
        {
            yield return why;
            yield break;
        }

        if (w.RunnerUp is { } r)
        {
            yield return $"best #{w.Best} against the runner-up #{r.LookB}: {Text.Count(r.Discordant)} discordant example(s), {Text.Count(r.OnlyA)} only the best gets wrong and {Text.Count(r.OnlyB)} only the runner-up; exact McNemar p = {CompareWriter.P(r.PValue)} (continuity-corrected {CompareWriter.P(r.PValueCorrected)}): {(w.RunnerUpTied ? "not distinguishable" : "the best is better")} at alpha = {Text.N(w.Alpha, 3)}.";
        }

        var tied = string.Join(", ", w.TiedWithBest.Take(20).Select(n => $"#{n}")) + (w.TiedWithBest.Count > 20 ? $", … ({Text.Count(w.TiedWithBest.Count)} in all)" : "");
        yield return $"tied with the best (Holm's step-down over {Text.Count(w.Rivals.Count)} comparisons, alpha = {Text.N(w.Alpha, 3)}): {tied}.";
        if (w.WithoutLosses > 0) yield return $"{Text.Count(w.WithoutLosses)} selectable look(s) carry only a score and were not compared.";
        yield return Accountant.Comparisons.WinnerTestResult.SelectionCaution;
    }

    private static void WinnerTable(StringBuilder b, Statement s)
    {
        if (s.Winner is null) return;
        b.AppendLine();
        b.AppendLine("Winner test (McNemar 1947; Holm 1979)");
        foreach (var sentence in WinnerSentences(s)) b.AppendLine($"  {sentence}");
    }

    public static string Markdown(Statement s)
    {
        var b = new StringBuilder();
        var h = s.Holdout;
        b.AppendLine($"### Holdout `{h.Name}`");
        b.AppendLine();
        b.AppendLine($"{Text.Count(h.Size)} examples, metric **{h.Metric.Name()}**, **{Text.Count(s.Looks)} looks** counted ({s.AdaptiveLooks} adaptive, {s.VoidedLooks} voided)" +
            (s.AdaptiveLooks > 0 ? $"; adaptive accounting: ln M_eff = {Text.N(s.LogEffectiveLooks, 2)}." : "."));
        if (s.Best is { } best)
        {
            b.AppendLine($"Best look #{best.Number}: observed {h.Metric.Name()} **{Text.N(best.Score)}**, configuration `{best.Configuration.Replace("`", "'", StringComparison.Ordinal)}`.");
        }

        b.AppendLine();
        if (s.Bounds.Count > 0)
        {
            b.AppendLine($"| method | {BoundWord(s)} ({Text.Percent(s.Options.Confidence)}, {Side(s)}) | margin | kind |");
            b.AppendLine("|---|---:|---:|---|");
            foreach (var line in s.Bounds)
            {
                var method = line.Tightest ? $"**{line.Method}**" : line.Method;
                b.AppendLine($"| {method} | {Text.N(line.Bound)} | {Text.N(line.Margin)} | {Kind(line)}{(line.Tightest ? ", tightest" : "")} |");
            }

            foreach (var line in s.Estimates)
            {
                b.AppendLine($"| {line.Method} | {Text.N(line.Bound)} | {Text.N(line.Margin)} | {EstimateKind(line)} |");
            }

            b.AppendLine();
            foreach (var sentence in MarginSentences(s)) b.AppendLine($"- {sentence}");
            if (s.Split is not null || s.CorrelationNote is not null) b.AppendLine();
        }

        if (s.Options.Estimates)
        {
            b.AppendLine(s.Estimates.Count > 0 ? EstimateHeader(s, s.Estimates[0]) + ":" : "Estimates: not available.");
            b.AppendLine();
            foreach (var sentence in EstimateSentences(s)) b.AppendLine($"- {sentence}");
            b.AppendLine();
        }

        if (s.Winner is not null)
        {
            b.AppendLine("Winner test (McNemar; Holm):");
            b.AppendLine();
            foreach (var sentence in WinnerSentences(s)) b.AppendLine($"- {sentence}");
            b.AppendLine();
        }

        b.AppendLine($"Budget: {Text.Count(s.Budget.LooksLeft)} of {Text.Count(s.Budget.MaxLooks)} looks left at tolerance {Text.N(s.Budget.Tolerance, 3)} ({s.Budget.Method}). Chain head `{s.ChainHead ?? "empty"}`.");
        if (s.Warnings.Count > 0)
        {
            b.AppendLine();
            foreach (var w in s.Warnings) b.AppendLine($"- **{w.Code}**: {w.Message}");
        }

        b.AppendLine();
        b.AppendLine("<details><summary>Cautions</summary>");
        b.AppendLine();
        foreach (var c in s.Cautions) b.AppendLine($"- {c}");
        b.AppendLine();
        b.AppendLine("</details>");
        return b.ToString();
    }

    public static string Json(Statement s) => JsonText(w => WriteJson(w, s));

    public static string JsonText(Action<Utf8JsonWriter> body)
    {
        using var stream = new MemoryStream();
        using (var writer = new Utf8JsonWriter(stream, JsonOptions))
        {
            body(writer);
        }

        return Encoding.UTF8.GetString(stream.ToArray()) + Environment.NewLine;
    }

    /// <summary>The statement's <c>bounds</c> array, as every JSON output that carries bounds writes it.</summary>
    public static void WriteBounds(Utf8JsonWriter w, Statement s)
    {
        w.WriteStartArray("bounds");
        foreach (var line in s.Bounds)
        {
            w.WriteStartObject();
            w.WriteString("method", line.Method);
            w.WriteNumber("bound", line.Bound);
            w.WriteNumber("margin", line.Margin);
            w.WriteBoolean("guarantee", line.Guarantee);
            w.WriteBoolean("tightest", line.Tightest);
            w.WriteNumber("lower", line.Lower);
            w.WriteNumber("upper", line.Upper);
            w.WriteString("reference", line.Reference);
            w.WriteEndObject();
        }

        w.WriteEndArray();
    }

    /// <summary>The statement's <c>warnings</c> array.</summary>
    public static void WriteWarnings(Utf8JsonWriter w, Statement s)
    {
        w.WriteStartArray("warnings");
        foreach (var warning in s.Warnings)
        {
            w.WriteStartObject();
            w.WriteString("code", warning.Code);
            w.WriteString("message", warning.Message);
            w.WriteEndObject();
        }

        w.WriteEndArray();
    }

    /// <summary>A JSON object that starts with <c>schemaVersion</c>, as every JSON output of the tool does.</summary>
    public static string JsonObject(Action<Utf8JsonWriter> fields) => JsonText(w =>
    {
        w.WriteStartObject();
        w.WriteNumber("schemaVersion", JsonSchemaVersion);
        fields(w);
        w.WriteEndObject();
    });

    public static void WriteJson(Utf8JsonWriter w, Statement s)
    {
        var h = s.Holdout;
        w.WriteStartObject();
        w.WriteNumber("schemaVersion", JsonSchemaVersion);
        w.WriteStartObject("holdout");
        w.WriteString("name", h.Name);
        w.WriteNumber("size", h.Size);
        w.WriteString("metric", h.Metric.Name());
        w.WriteStartArray("lossRange");
        w.WriteNumberValue(h.Metric.IsZeroOne() ? 0 : h.LossRange.Low);
        w.WriteNumberValue(h.Metric.IsZeroOne() ? 1 : h.LossRange.High);
        w.WriteEndArray();
        w.WriteString("fingerprint", h.Fingerprint);
        w.WriteEndObject();
        w.WriteNumber("looks", s.Looks);
        w.WriteNumber("adaptiveLooks", s.AdaptiveLooks);
        w.WriteNumber("logEffectiveLooks", s.LogEffectiveLooks);
        if (double.IsFinite(s.EffectiveLooks)) w.WriteNumber("effectiveLooks", s.EffectiveLooks); else w.WriteNull("effectiveLooks");
        w.WriteNumber("voidedLooks", s.VoidedLooks);
        w.WriteNumber("scoreOnlyLooks", s.ScoreOnlyLooks);
        w.WriteNumber("testOpenings", s.TestOpenings);
        w.WriteNumber("confidence", s.Options.Confidence);
        w.WriteString("sided", Side(s));
        if (s.Best is { } best)
        {
            w.WriteStartObject("best");
            w.WriteNumber("look", best.Number);
            w.WriteNumber("observed", best.Score);
            w.WritePropertyName("configuration");
            w.WriteRawValue(best.Configuration);
            w.WriteString("search", best.Search);
            w.WriteString("stage", best.Stage);
            w.WriteEndObject();
        }
        else
        {
            w.WriteNull("best");
        }

        WriteBounds(w, s);
        WriteMargin(w, s);
        WriteEstimates(w, s);
        WriteWinner(w, s);
        w.WriteStartObject("budget");
        w.WriteNumber("tolerance", s.Budget.Tolerance);
        w.WriteString("method", s.Budget.Method);
        w.WriteNumber("maxLooks", s.Budget.MaxLooks);
        w.WriteNumber("looksUsed", s.Budget.LooksUsed);
        w.WriteNumber("looksLeft", s.Budget.LooksLeft);
        w.WriteEndObject();
        w.WriteString("chainHead", s.ChainHead);
        WriteWarnings(w, s);
        w.WriteStartArray("cautions");
        foreach (var caution in s.Cautions) w.WriteStringValue(caution);
        w.WriteEndArray();
        w.WriteEndObject();
    }

    /// <summary>The margin split, the effective comparisons, the anchors and the correlation note.</summary>
    public static void WriteMargin(Utf8JsonWriter w, Statement s)
    {
        if (s.Split is { } split)
        {
            w.WriteStartObject("marginSplit");
            w.WriteNumber("sampling", split.Sampling);
            w.WriteString("samplingMethod", split.SamplingMethod);
            w.WriteNumber("comparisons", split.Comparisons);
            w.WriteEndObject();
        }
        else
        {
            w.WriteNull("marginSplit");
        }

        if (s.EffectiveComparisons is { } effective) w.WriteNumber("effectiveComparisons", effective); else w.WriteNull("effectiveComparisons");
        w.WriteStartArray("anchors");
        foreach (var a in s.Anchors)
        {
            w.WriteStartObject();
            w.WriteString("name", a.Name);
            w.WriteNumber("looks", a.Members);
            w.WriteNumber("errors", a.Errors);
            w.WriteNumber("weight", a.Weight);
            w.WriteNumber("onlySelected", a.OnlyLook);
            w.WriteNumber("onlyAnchor", a.OnlyAnchor);
            w.WriteEndObject();
        }

        w.WriteEndArray();
        w.WriteString("correlationNote", s.CorrelationNote is { Length: > 0 } note ? note : null);
    }

    private static void WriteEstimates(Utf8JsonWriter w, Statement s)
    {
        w.WriteStartArray("estimates");
        foreach (var line in s.Estimates)
        {
            w.WriteStartObject();
            w.WriteString("method", line.Method);
            if (line.Estimate is { } estimate) w.WriteNumber("estimate", estimate);
            else w.WriteNull("estimate");
            w.WriteNumber("bound", line.Bound);
            w.WriteNumber("margin", line.Margin);
            w.WriteBoolean("guarantee", false);
            w.WriteBoolean("asymptotic", line.Asymptotic);
            w.WriteNumber("lower", line.Lower);
            w.WriteNumber("upper", line.Upper);
            if (line.CriticalValue is { } c) w.WriteNumber("criticalValue", c);
            w.WriteNumber("looks", line.Looks);
            w.WriteNumber("resamples", line.Resamples);
            w.WriteNumber("seed", line.Seed);
            w.WriteString("reference", line.Reference);
            w.WriteEndObject();
        }

        w.WriteEndArray();
        w.WriteString("estimatesNote", s.EstimatesNote);
    }

    private static void WriteWinner(Utf8JsonWriter w, Statement s)
    {
        if (s.Winner is not { } winner)
        {
            w.WriteNull("winner");
            return;
        }

        w.WriteStartObject("winner");
        w.WriteNumber("best", winner.Best);
        w.WriteNumber("alpha", winner.Alpha);
        if (winner.RunnerUp is { } r)
        {
            w.WriteStartObject("runnerUp");
            w.WriteNumber("look", r.LookB);
            w.WriteNumber("onlyBest", r.OnlyA);
            w.WriteNumber("onlyRunnerUp", r.OnlyB);
            w.WriteNumber("pValue", r.PValue);
            w.WriteNumber("pValueCorrected", r.PValueCorrected);
            w.WriteBoolean("tied", winner.RunnerUpTied);
            w.WriteEndObject();
        }
        else
        {
            w.WriteNull("runnerUp");
        }

        w.WriteStartArray("tiedWithBest");
        foreach (var look in winner.TiedWithBest) w.WriteNumberValue(look);
        w.WriteEndArray();
        w.WriteNumber("comparisons", winner.Rivals.Count);
        w.WriteNumber("withoutLosses", winner.WithoutLosses);
        w.WriteString("unavailable", winner.Unavailable);
        w.WriteString("caution", Accountant.Comparisons.WinnerTestResult.SelectionCaution);
        w.WriteString("reference", PerExampleMethods.WinnerReference);
        w.WriteEndObject();
    }
}
