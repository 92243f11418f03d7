using System.Globalization;
using System.Text;
using Accountant.Cli;

namespace Accountant.Cli.Tests;

/// <summary>Runs the command line in-process in a temporary folder, with captured output.</summary>
public sealed class CliHarness : IDisposable
{
    public CliHarness()
    {
        Folder = Path.Combine(Path.GetTempPath(), "accountant-cli-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Folder);
        Ledger = Path.Combine(Folder, "ledger.db");
    }

    public string Folder { get; }

    public string Ledger { get; }

    public Dictionary<string, string> Variables { get; } = new();

    public sealed record Result(int Exit, string Out, string Err);

    /// <summary>Runs <c>accountant ARGS --ledger LEDGER</c> (unless the arguments name a ledger or say not to).</summary>
    public Result Run(params string[] args) => RunRaw(args.Contains("--ledger") || args.Contains("--no-ledger") ? args.Where(a => a != "--no-ledger").ToArray() : [.. args, "--ledger", Ledger]);

    public Result RunRaw(string[] args, CancellationToken cancel = default)
    {
        var output = new StringWriter(CultureInfo.InvariantCulture);
        var error = new StringWriter(CultureInfo.InvariantCulture);
        var env = new CliEnvironment(output, error, name => Variables.TryGetValue(name, out var v) ? v : null) { Cancel = cancel };
        var exit = AccountantCli.Run(args, env);
        return new Result(exit, output.ToString(), error.ToString());
    }

    public string Write(string name, string content)
    {
        var path = Path.Combine(Folder, name);
        File.WriteAllText(path, content, new UTF8Encoding(false));
        return path;
    }

    /// <summary>A labels CSV with n examples "e1".."en", labels alternating 0/1.</summary>
    public string Labels(int n, string name = "labels.csv") =>
        Write(name, "id,label\n" + string.Concat(Enumerable.Range(1, n).Select(i => $"e{i},{i % 2}\n")));

    /// <summary>A predictions CSV wrong on the first <paramref name="wrong"/> examples.</summary>
    public string Predictions(int n, int wrong, string name) =>
        Write(name, "id,prediction\n" + string.Concat(Enumerable.Range(1, n).Select(i => $"e{i},{(i <= wrong ? 1 - i % 2 : i % 2)}\n")));

    public void Dispose()
    {
        try { Directory.Delete(Folder, true); } catch (IOException) { } catch (UnauthorizedAccessException) { }
    }
}
