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
                    w.WriteStartArray("holdouts");
                    foreach (var h in report.Recounts)
                    {
                        w.WriteStartObject();
                        w.WriteString("name", h.Holdout);
                        w.WriteNumber("looks", h.Looks);
                        w.WriteNumber("adaptiveLooks", h.AdaptiveLooks);
                        w.WriteNumber("logEffectiveLooks", h.LogEffectiveLooks);
                        w.WriteNumber("guardStreams", h.Streams);
                        w.WriteNumber("releasesReplayed", h.ReplayedReleases);
                        w.WriteNumber("releasesTakenAsRecorded", h.UncheckedReleases);
                        w.WriteEndObject();
                    }

                    w.WriteEndArray();
                }));
            }
            else if (report.Valid)
            {
                env.Output.WriteLine($"chain valid: {Text.Count(report.Entries)} entries, head {report.Head ?? "(empty)"}");
                foreach (var h in report.Recounts)
                {
                    // Recounted from the rows, independently of the statement's queries.
                    var guarded = h.ReplayedReleases + h.UncheckedReleases == 0 ? ""
                        : $"; {Text.Count(h.ReplayedReleases)} guarded release(s) on {Text.Count(h.Streams)} stream(s) replayed and as recorded"
                          + (h.UncheckedReleases > 0 ? $", {Text.Count(h.UncheckedReleases)} older thresholdout release(s) taken as recorded (their noise was not kept)" : "");
                    var effective = h.AdaptiveLooks == 0 ? "" : $", ln M_eff {Text.N(h.LogEffectiveLooks)}";
                    env.Output.WriteLine($"  holdout '{h.Holdout}': {Text.Count(h.Looks)} look(s), {Text.Count(h.AdaptiveLooks)} adaptive{effective}{guarded}");
                }
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
