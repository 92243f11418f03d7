using System.CommandLine;
using Accountant.Bounds;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class PlanCommand : Command
{
    public PlanCommand(CliEnvironment env)
        : base("plan", "The holdout size needed to compare M looks to within a tolerance.\nExample: accountant plan --looks 200 --tolerance 0.02 --error 0.1")
    {
        var looks = new Option<long>("--looks") { Description = "How many looks the holdout must support.", Required = true };
        var tolerance = Common.Tolerance(null, required: true);
        var confidence = Common.Confidence();
        var error = new Option<double?>("--error") { Description = "An expected error rate P, for the exact binomial plan (0/1 loss)." };
        var twoSided = Common.TwoSided();
        var format = Common.Format("table", "json");
        foreach (var option in new Option[] { looks, tolerance, confidence, error, twoSided, format }) Options.Add(option);
        SetAction(r => Common.Guard(env, () =>
        {
            var m = r.GetValue(looks);
            var eps = r.GetValue(tolerance);
            var delta = 1 - r.GetValue(confidence);
            var sided = r.GetValue(twoSided) ? Sidedness.TwoSided : Sidedness.OneSided;
            var hoeffding = HoeffdingUnion.SampleSize(m, eps, delta, 1.0, sided);
            long? exact = r.GetValue(error) is { } p ? BinomialUnion.SampleSize(m, eps, delta, p, sided) : null;
            if (r.GetValue(format) == "json")
            {
                env.Output.Write(StatementWriter.JsonObject(w =>
                {
                    w.WriteNumber("looks", m);
                    w.WriteNumber("tolerance", eps);
                    w.WriteNumber("confidence", 1 - delta);
                    w.WriteString("sided", sided == Sidedness.OneSided ? "one-sided" : "two-sided");
                    w.WriteStartArray("plans");
                    w.WriteStartObject();
                    w.WriteString("method", HoeffdingUnion.Name);
                    w.WriteNumber("holdoutSize", hoeffding);
                    w.WriteEndObject();
                    if (exact is { } n)
                    {
                        w.WriteStartObject();
                        w.WriteString("method", BinomialUnion.Name);
                        w.WriteNumber("expectedError", r.GetValue(error)!.Value);
                        w.WriteNumber("holdoutSize", n);
                        w.WriteEndObject();
                    }

                    w.WriteEndArray();
                }));
                return ExitCodes.Success;
            }

            var side = sided == Sidedness.OneSided ? "one-sided" : "two-sided";
            env.Output.WriteLine($"for {Text.Count(m)} look(s) at tolerance {Text.N(eps, 3)} and confidence {Text.Percent(1 - delta)} ({side}):");
            env.Output.WriteLine($"  {Text.Count(hoeffding),10} examples  {HoeffdingUnion.Name} (any 0/1 or [0,1] loss, distribution-free)");
            if (exact is { } size)
            {
                env.Output.WriteLine($"  {Text.Count(size),10} examples  {BinomialUnion.Name} (0/1 loss at an expected error of {Text.N(r.GetValue(error)!.Value, 3)})");
            }

            return ExitCodes.Success;
        }));
    }
}
