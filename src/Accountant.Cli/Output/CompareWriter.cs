using System.Text;
using Accountant.Comparisons;

namespace Accountant.Cli.Output;

/// <summary>Renders <c>accountant compare</c>.</summary>
internal static class CompareWriter
{
    public static string Caution(LookComparison c) => c.SelectedOnThisHoldout
        ? "one of these looks was selected as best or runner-up on this holdout, so the p-value is optimistic (the difference was searched for); confirm it on data not used for selection."
        : "the test treats the two looks as chosen in advance; if they were picked after seeing holdout scores, the p-value is optimistic.";

    public static string Table(LookComparison c, double alpha)
    {
        var t = c.Test;
        var h = c.Holdout;
        var metric = h.Metric.Name();
        var b = new StringBuilder();
        b.AppendLine($"Holdout      {h.Name}: {Text.Count(h.Size)} examples, metric {metric}");
        b.AppendLine($"Look A       #{c.A.Number}{Tag(c, c.A.Number)}: {metric} {Text.N(c.A.Score)}  {Text.Short(c.A.Configuration, 80)}");
        b.AppendLine($"Look B       #{c.B.Number}{Tag(c, c.B.Number)}: {metric} {Text.N(c.B.Score)}  {Text.Short(c.B.Configuration, 80)}");
        b.AppendLine($"Disagree     {Text.Count(t.Discordant)} example(s): {Text.Count(t.OnlyA)} only A gets wrong, {Text.Count(t.OnlyB)} only B gets wrong");
        b.AppendLine($"McNemar      exact two-sided p = {P(t.PValue)}; continuity-corrected chi-square {Text.N(t.ChiSquare)}, p = {P(t.PValueCorrected)}");
        b.AppendLine(t.PValue <= alpha
            ? $"Verdict      look #{(t.OnlyA < t.OnlyB ? c.A.Number : c.B.Number)} makes fewer errors, distinguishable at alpha = {Text.N(alpha, 3)} (exact test)"
            : $"Verdict      not distinguishable at alpha = {Text.N(alpha, 3)} (exact test)");
        b.AppendLine($"Caution      {Caution(c)}");
        return b.ToString();
    }

    public static string Json(LookComparison c, double alpha) => StatementWriter.JsonObject(w =>
    {
        var t = c.Test;
        w.WriteString("holdout", c.Holdout.Name);
        w.WriteNumber("size", c.Holdout.Size);
        w.WriteString("metric", c.Holdout.Metric.Name());
        w.WriteStartObject("lookA");
        w.WriteNumber("look", c.A.Number);
        w.WriteNumber("observed", c.A.Score);
        w.WriteEndObject();
        w.WriteStartObject("lookB");
        w.WriteNumber("look", c.B.Number);
        w.WriteNumber("observed", c.B.Score);
        w.WriteEndObject();
        w.WriteNumber("onlyA", t.OnlyA);
        w.WriteNumber("onlyB", t.OnlyB);
        w.WriteNumber("discordant", t.Discordant);
        w.WriteString("test", "McNemar exact, two-sided");
        w.WriteNumber("pValue", t.PValue);
        w.WriteNumber("chiSquare", t.ChiSquare);
        w.WriteNumber("pValueCorrected", t.PValueCorrected);
        w.WriteString("pValueCorrectedMeans", "continuity-corrected chi-square approximation (Edwards 1948)");
        w.WriteNumber("alpha", alpha);
        w.WriteBoolean("distinguishable", t.PValue <= alpha);
        w.WriteBoolean("selectedOnThisHoldout", c.SelectedOnThisHoldout);
        w.WriteString("caution", Caution(c));
    });

    private static string Tag(LookComparison c, int number) => c.Best?.Number == number ? " (best)" : "";

    internal static string P(double p) => p < 0.0001 ? p.ToString("0.0e+0", System.Globalization.CultureInfo.InvariantCulture) : Text.N(p);
}
