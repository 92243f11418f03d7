using System.Diagnostics;
using System.Text;

namespace Accountant.Cli.Tests.Reliability;

/// <summary>Runs the built CLI (and the library load writer) as separate processes, found beside the test assembly.</summary>
internal static class Processes
{
    public static string Folder { get; } = Path.GetDirectoryName(typeof(Processes).Assembly.Location)!;

    public static string Cli => Path.Combine(Folder, "accountant.dll");

    public static string LoadWriter => Path.Combine(Folder, "accountant-load-writer.dll");

    public sealed record Finished(int Exit, string Out, string Err);

    /// <summary>A started process whose output is collected as it arrives.</summary>
    public sealed class Running : IDisposable
    {
        private readonly StringBuilder _out = new();
        private readonly StringBuilder _err = new();

        public Running(string dll, IEnumerable<string> args, IReadOnlyDictionary<string, string?>? environment = null)
        {
            var info = new ProcessStartInfo("dotnet") { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false };
            info.ArgumentList.Add(dll);
            foreach (var a in args) info.ArgumentList.Add(a);
            info.Environment["DOTNET_CLI_TELEMETRY_OPTOUT"] = "1";
            info.Environment["DOTNET_NOLOGO"] = "1";
            foreach (var (name, value) in environment ?? new Dictionary<string, string?>()) info.Environment[name] = value;
            Process = new Process { StartInfo = info };
            Process.OutputDataReceived += (_, e) => { if (e.Data is not null) lock (_out) _out.AppendLine(e.Data); };
            Process.ErrorDataReceived += (_, e) => { if (e.Data is not null) lock (_err) _err.AppendLine(e.Data); };
            Process.Start();
            Process.BeginOutputReadLine();
            Process.BeginErrorReadLine();
        }

        public Process Process { get; }

        public string Out { get { lock (_out) return _out.ToString(); } }

        /// <summary>Waits (generously) for the process to end and returns what it wrote.</summary>
        public Finished Wait(TimeSpan? timeout = null)
        {
            if (!Process.WaitForExit(timeout ?? TimeSpan.FromMinutes(3)))
            {
                Process.Kill(entireProcessTree: true);
                throw new TimeoutException($"'{string.Join(' ', Process.StartInfo.ArgumentList)}' did not finish.");
            }

            Process.WaitForExit(); // flushes the asynchronous readers
            lock (_out) lock (_err) return new Finished(Process.ExitCode, _out.ToString(), _err.ToString());
        }

        /// <summary>SIGKILL: the process gets no chance to clean up.</summary>
        public void Kill()
        {
            try
            {
                Process.Kill(entireProcessTree: false);
            }
            catch (InvalidOperationException)
            {
                // It had already ended.
            }

            Process.WaitForExit();
        }

        public void Dispose() => Process.Dispose();
    }

    public static Finished Run(string dll, params string[] args)
    {
        using var running = new Running(dll, args);
        return running.Wait();
    }

    /// <summary>Runs with these environment variables set (or, when null, removed) for the child alone.</summary>
    public static Finished RunWith(IReadOnlyDictionary<string, string?> environment, string dll, params string[] args)
    {
        using var running = new Running(dll, args, environment);
        return running.Wait();
    }
}
