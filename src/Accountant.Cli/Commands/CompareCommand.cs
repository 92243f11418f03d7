using System.CommandLine;
using Accountant.Comparisons;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class CompareCommand : Command
{
    public CompareCommand(CliEnvironment env)
        : base("compare", "Is one look really better than another? McNemar's test on the examples where exactly one of them errs.\nExample: accountant compare validation best runner-up --format json")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout." };
        var lookA = new Argument<string>("LOOK_A") { Description = "A look number, 'best' or 'runner-up'." };
        var lookB = new Argument<string>("LOOK_B") { Description = "Another look number, 'best' or 'runner-up'." };
        var confidence = Common.Confidence();
        var format = Common.Format("table", "json");
        Arguments.Add(name);
        Arguments.Add(lookA);
        Arguments.Add(lookB);
        Options.Add(confidence);
        Options.Add(format);
        SetAction(r => Common.Guard(env, () =>
        {
            var level = r.GetValue(confidence);
            if (!(level > 0 && level < 1))
            {
                throw AccountantException.BadArguments("the confidence must lie strictly between 0 and 1; give --confidence as, for example, 0.95.");
            }

            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var comparison = book.Compare(r.GetValue(name)!, r.GetValue(lookA)!, r.GetValue(lookB)!);
            var alpha = Math.Round(1 - level, 12); // 1 − 0.95 is 0.050000000000000044 in binary floating point
            env.Output.Write(r.GetValue(format) == "json" ? CompareWriter.Json(comparison, alpha) : CompareWriter.Table(comparison, alpha));
            return ExitCodes.Success;
        }));
    }
}
