using System.CommandLine;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class BudgetCommand : Command
{
    public BudgetCommand(CliEnvironment env)
        : base("budget", "Looks used and left on a holdout before the margin passes a tolerance.\nExample: accountant budget validation --tolerance 0.02 --strict")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout." };
        var tolerance = Common.Tolerance(null, required: true);
        var confidence = Common.Confidence();
        var twoSided = Common.TwoSided();
        var strict = new Option<bool>("--strict") { Description = $"Exit with code {ExitCodes.GateFailed} when the holdout is overused (for CI pipelines)." };
        var format = Common.Format("table", "json");
        Arguments.Add(name);
        foreach (var option in new Option[] { tolerance, confidence, twoSided, strict, format }) Options.Add(option);
        SetAction(r => Common.Guard(env, () =>
        {
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var statement = book.Statement(r.GetValue(name)!, Common.StatementOptions(r, confidence, tolerance, twoSided));
            var budget = statement.Budget;
            if (r.GetValue(format) == "json")
            {
                env.Output.Write(StatementWriter.JsonObject(w =>
                {
                    w.WriteString("holdout", statement.Holdout.Name);
                    w.WriteNumber("tolerance", budget.Tolerance);
                    w.WriteNumber("confidence", statement.Options.Confidence);
                    w.WriteString("method", budget.Method);
                    w.WriteNumber("looksUsed", budget.LooksUsed);
                    w.WriteNumber("maxLooks", budget.MaxLooks);
                    w.WriteNumber("looksLeft", budget.LooksLeft);
                    w.WriteBoolean("overused", budget.Overused);
                }));
            }
            else
            {
                env.Output.WriteLine($"holdout '{statement.Holdout.Name}': {Text.Count(budget.LooksUsed)} look(s) used of {Text.Count(budget.MaxLooks)} at tolerance {Text.N(budget.Tolerance, 3)} and confidence {Text.Percent(statement.Options.Confidence)} ({budget.Method}); {Text.Count(budget.LooksLeft)} left");
            }

            if (budget.Overused && r.GetValue(strict))
            {
                env.Error.WriteLine($"accountant: holdout '{statement.Holdout.Name}' is overused ({Text.Count(budget.LooksUsed)} looks, budget {Text.Count(budget.MaxLooks)}); collect fresh validation data or relax --tolerance.");
                return ExitCodes.GateFailed;
            }

            return ExitCodes.Success;
        }));
    }
}
