using System.CommandLine;
using Accountant.Cli.Output;
using Accountant.Search;

namespace Accountant.Cli.Commands;

internal sealed class UnsealCommand : Command
{
    public UnsealCommand(CliEnvironment env)
        : base("unseal", "Score the selected configuration on the sealed test set, record the opening, and compare it with the validation score and the bound.\nExample: accountant unseal data-validation")
    {
        var name = new Argument<string>("NAME") { Description = "The holdout a search made." };
        var confidence = Common.Confidence();
        var tolerance = Common.Tolerance(0.02);
        var twoSided = Common.TwoSided();
        var format = Common.Format("table", "json", "markdown");
        Arguments.Add(name);
        foreach (var option in new Option[] { confidence, tolerance, twoSided, format }) Options.Add(option);
        SetAction(r => Common.Guard(env, () =>
        {
            var ledger = Common.LedgerPath(r, env);
            using var book = Bookkeeper.Open(ledger, env.Clock);
            var holdout = book.Holdout(r.GetValue(name)!);
            var record = SearchRecord.Read(TabularSearch.RecordPathFor(book.Store, holdout.Name));
            var (score, rows, fingerprint) = new TabularSearch(book, ledger).ScoreTest(record);
            book.RecordOpening(holdout.Name, record.Look, rows, fingerprint, score);
            var statement = book.Statement(holdout.Name, Common.StatementOptions(r, confidence, tolerance, twoSided));
            var validation = book.Store.Looks(holdout).Single(l => l.Number == record.Look).Score;
            var text = r.GetValue(format)!;
            if (text == "json")
            {
                env.Output.Write(StatementWriter.JsonObject(w =>
                {
                    w.WriteStartObject("holdout");
                    w.WriteString("name", holdout.Name);
                    w.WriteNumber("size", holdout.Size);
                    w.WriteString("metric", holdout.Metric.Name());
                    w.WriteEndObject();
                    w.WriteNumber("look", record.Look);
                    w.WriteStartObject("validation");
                    w.WriteNumber("observed", validation);
                    w.WriteEndObject();
                    w.WriteStartObject("test");
                    w.WriteNumber("observed", score);
                    w.WriteNumber("size", rows);
                    w.WriteString("fingerprint", fingerprint);
                    w.WriteEndObject();
                    w.WriteNumber("testOpenings", statement.TestOpenings);
                    StatementWriter.WriteBounds(w, statement);
                    StatementWriter.WriteWarnings(w, statement);
                    w.WriteString("chainHead", statement.ChainHead);
                }));
            }
            else
            {
                var metric = holdout.Metric.Name();
                var bound = statement.Primary;
                var rowsText = $"  look #{record.Look} validation {metric} {Text.N(validation)}; test {metric} {Text.N(score)} on {Text.Count(rows)} sealed rows; {bound?.Method} bound {Text.N(bound?.Bound ?? double.NaN)}";
                env.Output.WriteLine(text == "markdown" ? $"**Test set opened** (opening {statement.TestOpenings}):" : $"Test set opened (opening {statement.TestOpenings} of this holdout)");
                env.Output.WriteLine(rowsText);
                foreach (var w in statement.Warnings.Where(w => w.Code is "test-reopened" or "selected-after-unseal"))
                {
                    env.Output.WriteLine($"  {w.Code}: {w.Message}");
                }
            }

            if (statement.TestOpenings > 1)
            {
                env.Error.WriteLine($"accountant: warning: the test set of '{holdout.Name}' has now been opened {statement.TestOpenings} times (test-reopened).");
            }

            return ExitCodes.Success;
        }));
    }
}
