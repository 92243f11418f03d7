using System.CommandLine;
using Accountant.Cli.Output;
using Accountant.Ledger;

namespace Accountant.Cli.Commands;

/// <summary>
/// Moves a whole ledger between backends (SQLite file ↔ PostgreSQL) with its chain intact: the source must verify, the
/// rows are written unchanged into an empty ledger in one transaction, and the copy is committed only when its chain,
/// recomputed from what was written, verifies and ends at the source's head.
/// </summary>
internal sealed class CopyCommand : Command
{
    public CopyCommand(CliEnvironment env)
        : base("copy", "Copy a whole ledger to another file or PostgreSQL database, chain intact; the copy verifies to the same chain head.\nExample: accountant copy --from project.db --to postgresql://ana@db.lab/tuning")
    {
        var from = new Option<string?>("--from") { Description = "The ledger to copy (else --ledger, $ACCOUNTANT_LEDGER or ./accountant.db)." };
        var to = new Option<string>("--to") { Description = "Where to put the copy: a new file, or a PostgreSQL address with no ledger yet.", Required = true };
        var format = Common.Format("table", "json");
        Options.Add(from);
        Options.Add(to);
        Options.Add(format);
        SetAction(r => Common.Guard(env, () =>
        {
            var source = r.GetValue(from) is { Length: > 0 } given ? given : Common.LedgerPath(r, env);
            var target = r.GetValue(to)!;
            var targetLocation = LedgerLocation.Parse(target);
            if (!targetLocation.IsPostgres && File.Exists(targetLocation.FilePath))
            {
                throw AccountantException.BadArguments($"a file already exists at '{targetLocation.FilePath}'; copy into a new file (nothing was written).");
            }

            using var book = Bookkeeper.Open(source, env.Clock);
            var sourceReport = book.Verify();
            if (!sourceReport.Valid)
            {
                throw new AccountantException(ErrorKind.Integrity, $"the source ledger {book.Store.Location} does not verify ({sourceReport.Problem}); nothing was copied.");
            }

            ChainReport copied;
            string targetDisplay;
            var created = !targetLocation.IsPostgres;
            try
            {
                using var destination = LedgerStores.OpenOrCreate(target, env.Clock);
                targetDisplay = destination.Location;
                copied = destination.Import(book.Store.Rows(), sourceReport.Head);
            }
            catch (AccountantException) when (created)
            {
                DeleteQuietly(targetLocation.FilePath!);
                throw;
            }

            if (r.GetValue(format) == "json")
            {
                env.Output.Write(StatementWriter.JsonObject(w =>
                {
                    w.WriteString("from", book.Store.Location);
                    w.WriteString("to", targetDisplay);
                    w.WriteNumber("entries", copied.Entries);
                    w.WriteString("chainHead", copied.Head);
                }));
            }
            else
            {
                env.Output.WriteLine($"copied {Text.Count(copied.Entries)} entries from {book.Store.Location} to {targetDisplay}");
                env.Output.WriteLine($"chain head {copied.Head ?? "(empty)"} (recomputed on the copy; the same as the source)");
            }

            return ExitCodes.Success;
        }));
    }

    private static void DeleteQuietly(string path)
    {
        foreach (var file in new[] { path, path + "-wal", path + "-shm" })
        {
            try { File.Delete(file); } catch (IOException) { } catch (UnauthorizedAccessException) { }
        }
    }
}
