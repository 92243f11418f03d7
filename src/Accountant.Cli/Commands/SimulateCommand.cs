using System.CommandLine;
using System.Globalization;
using Accountant.Cli.Output;
using Accountant.Guards;
using Accountant.Simulation;

namespace Accountant.Cli.Commands;

internal sealed class SimulateCommand : Command
{
    public SimulateCommand(CliEnvironment env)
        : base("simulate", "Monte Carlo of searches with known truth: how optimistic the raw best is and how often each bound covers.\nExample: accountant simulate --holdout-size 2000 --looks 200 --strategy attack --guard ladder:0.01")
    {
        var size = new Option<int>("--holdout-size") { Description = "Examples in the simulated holdout.", DefaultValueFactory = _ => 1000 };
        var looks = new Option<int>("--looks") { Description = "Looks per simulated search.", DefaultValueFactory = _ => 100 };
        var trueError = new Option<string>("--true-error") { Description = "The configurations' true error: P, or a spread LO:HI.", DefaultValueFactory = _ => "0.2" };
        var correlation = new Option<double>("--correlation") { Description = "Share of examples on which all configurations err alike, in [0, 0.99].", DefaultValueFactory = _ => 0.0 };
        var strategy = new Option<string>("--strategy") { Description = "fixed (non-adaptive), refine (around the best released value) or attack (combine what looked good).", DefaultValueFactory = _ => "fixed" };
        strategy.AcceptOnlyFromAmong("fixed", "refine", "attack");
        var guard = new Option<string>("--guard") { Description = "How scores are released to the analyst: exact, rounded:D, ladder:STEP, thresholdout:T,SIGMA,BUDGET.", DefaultValueFactory = _ => "exact" };
        var confidence = Common.Confidence();
        var repetitions = new Option<int>("--repetitions") { Description = "Simulated searches.", DefaultValueFactory = _ => 1000 };
        var seed = new Option<int>("--seed") { Description = "Seed; the result depends on it alone.", DefaultValueFactory = _ => 1 };
        var plotPath = new Option<string?>("--plot") { Description = "Also draw each method's margin against the oracle's, with its coverage, to FILE.png or FILE.svg." };
        var perExample = new Option<bool>("--per-example") { Description = "Draw every example's loss (fixed strategy), so that chained-binomial, which reads per-example losses, is simulated too." };
        var format = Common.Format("table", "json");
        foreach (var option in new Option[] { size, looks, trueError, correlation, strategy, guard, confidence, repetitions, seed, perExample, plotPath, format }) Options.Add(option);
        SetAction(r => Common.Guard(env, () =>
        {
            var (low, high) = ParseTrueError(r.GetValue(trueError)!);
            var options = new SimulationOptions
            {
                HoldoutSize = r.GetValue(size),
                Looks = r.GetValue(looks),
                TrueErrorLow = low,
                TrueErrorHigh = high,
                Correlation = r.GetValue(correlation),
                Strategy = Enum.Parse<AnalystStrategy>(r.GetValue(strategy)!, ignoreCase: true),
                Guard = GuardSpec.Parse(r.GetValue(guard)!),
                Confidence = r.GetValue(confidence),
                Repetitions = r.GetValue(repetitions),
                Seed = r.GetValue(seed),
                PerExample = r.GetValue(perExample),
            };
            if (r.GetValue(plotPath) is { } plot) Accountant.Search.Plots.StatementPlot.CheckPath(plot);
            var result = SearchSimulator.Run(options, cancel: env.Cancel);
            env.Output.Write(r.GetValue(format) == "json" ? Json(result) : Table(result));
            if (r.GetValue(plotPath) is { } file)
            {
                Accountant.Search.Plots.SimulationPlot.Write(result, file);
                env.Error.WriteLine($"plot written to {file}");
            }
            return ExitCodes.Success;
        }));
    }

    private static (double, double) ParseTrueError(string text)
    {
        var parts = text.Split(':');
        if (parts.Length is 1 or 2 && parts.All(p => double.TryParse(p, NumberStyles.Float, CultureInfo.InvariantCulture, out _)))
        {
            var values = parts.Select(p => double.Parse(p, NumberStyles.Float, CultureInfo.InvariantCulture)).ToArray();
            return (values[0], values[^1]);
        }

        throw AccountantException.BadArguments($"--true-error '{text}' is not a rate or a spread; give, for example, 0.2 or 0.1:0.3.");
    }

    private static string Table(SimulationResult s)
    {
        var o = s.Options;
        var b = new System.Text.StringBuilder();
        b.AppendLine($"{Text.Count(o.Repetitions)} simulated searches: {Text.Count(o.Looks)} looks on {Text.Count(o.HoldoutSize)} examples, strategy {o.Strategy.ToString().ToLowerInvariant()}, guard {o.Guard}, true error {Text.N(o.TrueErrorLow, 3)}{(o.TrueErrorHigh > o.TrueErrorLow ? ":" + Text.N(o.TrueErrorHigh, 3) : "")}, correlation {Text.N(o.Correlation, 2)}");
        b.AppendLine($"adaptive accounting: ln M_eff = {Text.N(s.LogEffectiveLooks, 2)}");
        b.AppendLine();
        b.AppendLine($"  mean best validation error   {Text.N(s.MeanObserved)}");
        b.AppendLine($"  mean true error of the pick  {Text.N(s.MeanTrue)}");
        b.AppendLine($"  optimism                     {Text.N(s.Optimism)}");
        b.AppendLine($"  raw best covers the truth    {Text.N(s.RawCoverage, 3)} ± {Text.N(s.RawCoverageStdErr, 3)}");
        b.AppendLine($"  oracle margin                {Text.N(s.OracleMargin)}  ({Text.Percent(o.Confidence)} quantile of true minus observed error of the pick)");
        b.AppendLine();
        b.AppendLine($"  {"method",-22} {"coverage",9} {"± s.e.",7} {"mean margin",12} {"/ oracle",9}");
        foreach (var m in s.Methods)
        {
            var note = m.Selection ? "  (the smallest of the above in each search: what reading the tightest line gives)"
                : m.ValidHere ? "" : "  (not valid for an adaptive analyst: shown to see it fail)";
            b.AppendLine($"  {m.Method,-22} {Text.N(m.Coverage, 3),9} {Text.N(m.CoverageStdErr, 3),7} {Text.N(m.MeanMargin),12} {(double.IsNaN(m.MarginToOracle) ? "-" : Text.N(m.MarginToOracle, 2)),9}{note}");
        }

        b.AppendLine();
        b.AppendLine($"  A {Text.Percent(o.Confidence)} guarantee should cover in at least {Text.Percent(o.Confidence)} of searches, up to Monte Carlo error; a margin 1.00 times the oracle's is as tight as the scenario allows.");
        return b.ToString();
    }

    private static string Json(SimulationResult s) => StatementWriter.JsonObject(w =>
    {
        var o = s.Options;
        w.WriteStartObject("options");
        w.WriteNumber("holdoutSize", o.HoldoutSize);
        w.WriteNumber("looks", o.Looks);
        w.WriteNumber("trueErrorLow", o.TrueErrorLow);
        w.WriteNumber("trueErrorHigh", o.TrueErrorHigh);
        w.WriteNumber("correlation", o.Correlation);
        w.WriteString("strategy", o.Strategy.ToString().ToLowerInvariant());
        w.WriteString("guard", o.Guard.ToString());
        w.WriteNumber("confidence", o.Confidence);
        w.WriteNumber("repetitions", o.Repetitions);
        w.WriteNumber("seed", o.Seed);
        w.WriteBoolean("perExample", o.PerExample);
        w.WriteEndObject();
        if (double.IsNaN(s.OracleMargin)) w.WriteNull("oracleMargin"); else w.WriteNumber("oracleMargin", s.OracleMargin);
        w.WriteNumber("logEffectiveLooks", s.LogEffectiveLooks);
        w.WriteStartObject("raw");
        w.WriteNumber("meanObserved", s.MeanObserved);
        w.WriteNumber("meanTrue", s.MeanTrue);
        w.WriteNumber("optimism", s.Optimism);
        w.WriteNumber("coverage", s.RawCoverage);
        w.WriteNumber("coverageStdErr", s.RawCoverageStdErr);
        w.WriteEndObject();
        w.WriteStartArray("methods");
        foreach (var m in s.Methods)
        {
            w.WriteStartObject();
            w.WriteString("method", m.Method);
            w.WriteNumber("coverage", m.Coverage);
            w.WriteNumber("coverageStdErr", m.CoverageStdErr);
            w.WriteNumber("meanMargin", m.MeanMargin);
            if (double.IsNaN(m.MarginToOracle)) w.WriteNull("marginToOracle"); else w.WriteNumber("marginToOracle", m.MarginToOracle);
            w.WriteBoolean("validForThisAnalyst", m.ValidHere);
            w.WriteBoolean("selection", m.Selection);
            w.WriteEndObject();
        }

        w.WriteEndArray();
    });
}
