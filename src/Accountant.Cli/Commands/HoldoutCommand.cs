using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using Accountant.Bounds;
using Accountant.Cli.Input;
using Accountant.Cli.Output;

namespace Accountant.Cli.Commands;

internal sealed class HoldoutCommand : Command
{
    public HoldoutCommand(CliEnvironment env)
        : base("holdout", "Register and inspect holdouts (validation sets).\nExample: accountant holdout add validation --labels labels.csv")
    {
        Subcommands.Add(Add(env));
        Subcommands.Add(List(env));
        Subcommands.Add(Show(env));
    }

    private static Command Add(CliEnvironment env)
    {
        var name = new Argument<string>("NAME") { Description = "The holdout's name." };
        var labels = new Option<string>("--labels") { Description = "CSV with a header and an id and a label column.", Required = true };
        var metric = new Option<string>("--metric") { Description = "error, accuracy, absolute-error, squared-error, or auc (labels 0/1, predictions are scores).", DefaultValueFactory = _ => "error" };
        metric.AcceptOnlyFromAmong("error", "accuracy", "absolute-error", "squared-error", "auc");
        var range = new Option<string?>("--loss-range") { Description = "LO,HI: the range each example's loss is clipped to (needed for absolute-error and squared-error)." };
        var idColumn = new Option<string>("--id-column") { Description = "The id column's name.", DefaultValueFactory = _ => "id" };
        var labelColumn = new Option<string>("--label-column") { Description = "The label column's name.", DefaultValueFactory = _ => "label" };
        var command = new Command("add", "Register a holdout from its labels.\nExample: accountant holdout add validation --labels labels.csv --metric error")
        {
            name, labels, metric, range, idColumn, labelColumn,
        };
        command.SetAction(r => Common.Guard(env, () =>
        {
            var parsedMetric = MetricExtensions.Parse(r.GetValue(metric)!);
            var lossRange = r.GetValue(range) is { } text ? ParseRange(text) : (LossRange?)null;
            var examples = InputFiles.Labels(r.GetValue(labels)!, r.GetValue(idColumn)!, r.GetValue(labelColumn)!);
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var holdout = book.RegisterHoldout(r.GetValue(name)!, examples, parsedMetric, lossRange);
            env.Output.WriteLine($"registered holdout '{holdout.Name}': {Text.Count(holdout.Size)} examples, metric {holdout.Metric.Name()}, fingerprint {holdout.Fingerprint}");
            return ExitCodes.Success;
        }));
        return command;
    }

    internal static LossRange ParseRange(string text)
    {
        var parts = text.Split(',');
        if (parts.Length == 2
            && double.TryParse(parts[0].Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out var low)
            && double.TryParse(parts[1].Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out var high))
        {
            return new LossRange(low, high);
        }

        throw AccountantException.BadArguments($"--loss-range '{text}' is not two numbers; give it as LO,HI, for example 0,10.");
    }

    private static Command List(CliEnvironment env)
    {
        var format = Common.Format("table", "json");
        var command = new Command("list", "List the registered holdouts.\nExample: accountant holdout list") { format };
        command.SetAction(r => Common.Guard(env, () =>
        {
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var holdouts = book.Store.Holdouts().Select(h => (Holdout: h, Looks: book.Store.Looks(h).Count)).ToList();
            if (r.GetValue(format) == "json")
            {
                env.Output.Write(StatementWriter.JsonObject(w =>
                {
                    w.WriteStartArray("holdouts");
                    foreach (var (h, looks) in holdouts)
                    {
                        w.WriteStartObject();
                        w.WriteString("name", h.Name);
                        w.WriteNumber("size", h.Size);
                        w.WriteString("metric", h.Metric.Name());
                        w.WriteNumber("looks", looks);
                        w.WriteString("fingerprint", h.Fingerprint);
                        w.WriteEndObject();
                    }

                    w.WriteEndArray();
                }));
                return ExitCodes.Success;
            }

            if (holdouts.Count == 0)
            {
                env.Output.WriteLine("no holdouts yet; register one with 'accountant holdout add NAME --labels FILE'");
                return ExitCodes.Success;
            }

            env.Output.WriteLine($"{"name",-24} {"examples",9} {"metric",-15} {"looks",6}  fingerprint");
            foreach (var (h, looks) in holdouts)
            {
                env.Output.WriteLine($"{Text.Short(h.Name, 24),-24} {Text.Count(h.Size),9} {h.Metric.Name(),-15} {looks,6}  {h.Fingerprint[..16]}");
            }

            return ExitCodes.Success;
        }));
        return command;
    }

    private static Command Show(CliEnvironment env)
    {
        var name = new Argument<string>("NAME") { Description = "The holdout's name." };
        var format = Common.Format("table", "json");
        var command = new Command("show", "Show one holdout and its looks.\nExample: accountant holdout show validation") { name, format };
        command.SetAction(r => Common.Guard(env, () =>
        {
            using var book = Bookkeeper.Open(Common.LedgerPath(r, env), env.Clock);
            var h = book.Holdout(r.GetValue(name)!);
            var looks = book.Store.Looks(h);
            var voided = book.Store.Voids(h).Select(v => v.LookNumber).ToHashSet();
            if (r.GetValue(format) == "json")
            {
                env.Output.Write(StatementWriter.JsonObject(w =>
                {
                    w.WriteString("name", h.Name);
                    w.WriteNumber("size", h.Size);
                    w.WriteString("metric", h.Metric.Name());
                    w.WriteString("fingerprint", h.Fingerprint);
                    w.WriteString("createdAt", h.CreatedAt.ToString("O", CultureInfo.InvariantCulture));
                    w.WriteStartArray("looks");
                    foreach (var look in looks)
                    {
                        w.WriteStartObject();
                        w.WriteNumber("look", look.Number);
                        w.WriteNumber("observed", look.Score);
                        w.WritePropertyName("configuration");
                        w.WriteRawValue(look.Configuration);
                        w.WriteString("search", look.Search);
                        w.WriteString("stage", look.Stage);
                        w.WriteBoolean("voided", voided.Contains(look.Number));
                        w.WriteBoolean("perExampleLosses", look.HasLosses);
                        w.WriteEndObject();
                    }

                    w.WriteEndArray();
                }));
                return ExitCodes.Success;
            }

            env.Output.WriteLine($"holdout '{h.Name}': {Text.Count(h.Size)} examples, metric {h.Metric.Name()}" +
                (h.Metric.IsZeroOne() ? "" : $", losses clipped to [{h.LossRange.Low.ToString(CultureInfo.InvariantCulture)}, {h.LossRange.High.ToString(CultureInfo.InvariantCulture)}]"));
            env.Output.WriteLine($"fingerprint {h.Fingerprint}, registered {h.CreatedAt.ToString("yyyy-MM-dd HH:mm:ss'Z'", CultureInfo.InvariantCulture)}");
            env.Output.WriteLine($"{looks.Count} look(s)");
            foreach (var look in looks)
            {
                var flags = (voided.Contains(look.Number) ? " voided" : "") + (look.HasLosses ? "" : " score-only") + (look.Stage is { } s ? $" stage={s}" : "");
                env.Output.WriteLine($"  #{look.Number,-5} {Text.N(look.Score)}{flags}  {Text.Short(look.Configuration, 80)}");
            }

            return ExitCodes.Success;
        }));
        return command;
    }
}
