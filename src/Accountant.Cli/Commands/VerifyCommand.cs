using System.CommandLine;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class VerifyCommand : Command
{
    public VerifyCommand(CliEnvironment env)
        : base("verify", "Recompute the ledger's hash chain and name the first entry that does not match.\nExample: accountant verify --head 3f2a…")
    {
        var head = new Option<string?>("--head") { Description = "A chain head printed earlier (e.g. by a statement): also detects truncation and rollback." };
        var format = Common.Format("table", "json");
        Options.Add(head);
        Options.Add(format);
        SetAction(r => Common.Guard(env, () =>
        {
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var report = book.Verify(r.GetValue(head));
            if (r.GetValue(format) == "json")
            {
                env.Output.Write(StatementWriter.JsonObject(w =>
                {
                    w.WriteBoolean("valid", report.Valid);
                    w.WriteNumber("entries", report.Entries);
                    w.WriteString("chainHead", report.Head);
                    if (report.FirstBadEntry is { } bad) w.WriteNumber("firstBadEntry", bad); else w.WriteNull("firstBadEntry");
                    w.WriteString("problem", report.Problem);
                }));
            }
            else if (report.Valid)
            {
                env.Output.WriteLine($"chain valid: {Text.Count(report.Entries)} entries, head {report.Head ?? "(empty)"}");
            }

            if (!report.Valid)
            {
                env.Error.WriteLine($"accountant: the ledger does not verify: {report.Problem}; restore it from a trusted copy.");
                return ExitCodes.LedgerIntegrity;
            }

            return ExitCodes.Success;
        }));
    }
}
