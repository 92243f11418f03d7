using System.Diagnostics;
using Npgsql;

namespace Accountant.Tests.Support;

/// <summary>
/// The PostgreSQL server the tests use: the one named by ACCOUNTANT_TEST_POSTGRES (a connection string; .ci/run starts
/// one and sets it), else a throwaway cluster started here with .ci/postgres.sh on 127.0.0.1 under a temporary folder
/// and stopped when the test process exits. Tests never touch any other server. Each test ledger lives in a schema
/// of its own, dropped afterwards.
/// </summary>
public static class PostgresServer
{
    public const string Variable = "ACCOUNTANT_TEST_POSTGRES";

    private static readonly Lazy<string> Server = new(Start, LazyThreadSafetyMode.ExecutionAndPublication);

    /// <summary>The server's connection string (no schema).</summary>
    public static string ConnectionString => Server.Value;

    /// <summary>A new, empty schema; the returned connection string has it first in its search path.</summary>
    public static string NewSchema(out string schema)
    {
        schema = "t_" + Guid.NewGuid().ToString("N")[..16];
        Execute($"CREATE SCHEMA {schema};");
        return new NpgsqlConnectionStringBuilder(ConnectionString) { SearchPath = schema }.ConnectionString;
    }

    public static void DropSchema(string schema) => Execute($"DROP SCHEMA IF EXISTS {schema} CASCADE;");

    /// <summary>Runs SQL as the test superuser with triggers off (session_replication_role = replica), to tamper with a ledger.</summary>
    public static void Tamper(string connectionString, string sql)
    {
        using var connection = new NpgsqlConnection(connectionString);
        connection.Open();
        using var command = new NpgsqlCommand("SET session_replication_role = replica; " + sql, connection);
        command.ExecuteNonQuery();
    }

    public static void Execute(string sql, string? connectionString = null)
    {
        using var connection = new NpgsqlConnection(connectionString ?? ConnectionString);
        connection.Open();
        using var command = new NpgsqlCommand(sql, connection);
        command.ExecuteNonQuery();
    }

    private static string Start()
    {
        if (Environment.GetEnvironmentVariable(Variable) is { Length: > 0 } given) return given;
        var cluster = StartThrowaway();
        AppDomain.CurrentDomain.ProcessExit += (_, _) => cluster.Dispose();
        return cluster.ConnectionString;
    }

    /// <summary>A throwaway cluster of its own (with <paramref name="password"/>, logins need it); disposing stops and removes it.</summary>
    public static Cluster StartThrowaway(string? password = null)
    {
        var script = FindScript() ?? throw new InvalidOperationException($"no PostgreSQL for the tests: set {Variable} to a connection string, or run them from a checkout (.ci/postgres.sh starts a throwaway server).");
        var folder = Path.Combine(Path.GetTempPath(), "accountant-pg-" + Guid.NewGuid().ToString("N")[..12]);
        Directory.CreateDirectory(folder);
        if (!OperatingSystem.IsWindows()) File.SetUnixFileMode(folder, UnixFileMode.UserRead | UnixFileMode.UserWrite | UnixFileMode.UserExecute | UnixFileMode.GroupRead | UnixFileMode.GroupExecute | UnixFileMode.OtherRead | UnixFileMode.OtherExecute);
        var (code, output, error) = Run(script, "start", folder, password);
        if (code != 0)
        {
            Run(script, "stop", folder, null);
            throw new InvalidOperationException($"could not start a throwaway PostgreSQL ({error.Trim()}); install Debian's postgresql package or set {Variable}.");
        }

        return new Cluster(output.Trim(), () => Run(script, "stop", folder, null)); // stops the server and removes its folder
    }

    /// <summary>A running throwaway cluster: its connection string (without any password) and how to stop it.</summary>
    public sealed class Cluster(string connectionString, Action stop) : IDisposable
    {
        private int _stopped;

        public string ConnectionString { get; } = connectionString;

        public void Dispose()
        {
            if (Interlocked.Exchange(ref _stopped, 1) == 0) stop();
        }
    }

    private static string? FindScript()
    {
        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
        {
            var candidate = Path.Combine(dir.FullName, ".ci", "postgres.sh");
            if (File.Exists(candidate)) return candidate;
        }

        return null;
    }

    private static (int Code, string Output, string Error) Run(string script, string action, string folder, string? password)
    {
        var start = new ProcessStartInfo("bash") { RedirectStandardOutput = true, RedirectStandardError = true };
        if (password is not null) start.Environment["ACCOUNTANT_PG_PASSWORD"] = password;
        foreach (var argument in new[] { script, action, folder }) start.ArgumentList.Add(argument);
        using var process = Process.Start(start)!;
        var output = process.StandardOutput.ReadToEndAsync();
        var error = process.StandardError.ReadToEndAsync();
        process.WaitForExit();
        return (process.ExitCode, output.Result, error.Result);
    }
}
