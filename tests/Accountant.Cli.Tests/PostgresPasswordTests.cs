using Accountant.Cli.Tests.Reliability;
using Accountant.Tests.Support;
using Npgsql;

namespace Accountant.Cli.Tests;

/// <summary>
/// Credentials for a PostgreSQL ledger, against a throwaway server of its own that requires a password (SCRAM-SHA-256):
/// the password is taken from the address, from PGPASSWORD, or from a password file (PGPASSFILE, or the passfile
/// parameter), in the format PostgreSQL documents for ~/.pgpass (hostname:port:database:username:password); a missing
/// or wrong one is one line naming where to put it, and no message ever shows it. The CLI runs as a separate process so
/// that the environment variables are its own.
/// </summary>
public sealed class PostgresPasswordTests : IDisposable
{
    private const string Password = "Plum-7-orchard";
    private readonly PostgresServer.Cluster _cluster = PostgresServer.StartThrowaway(Password);
    private readonly string _folder = Path.Combine(Path.GetTempPath(), "accountant-pw-" + Guid.NewGuid().ToString("N"));

    public PostgresPasswordTests() => Directory.CreateDirectory(_folder);

    public void Dispose()
    {
        _cluster.Dispose();
        try { Directory.Delete(_folder, true); } catch (IOException) { }
    }

    private string Address(string? password = null, string query = "?schema=team")
    {
        var b = new NpgsqlConnectionStringBuilder(_cluster.ConnectionString);
        var secret = password is null ? "" : ":" + Uri.EscapeDataString(password);
        return $"postgresql://{b.Username}{secret}@{b.Host}:{b.Port}/{b.Database}{query}";
    }

    private static Dictionary<string, string?> Clean(params (string, string?)[] set)
    {
        // Nothing from the test process's own environment may supply a password.
        var environment = new Dictionary<string, string?> { ["PGPASSWORD"] = null, ["PGPASSFILE"] = null, ["HOME"] = Path.GetTempPath(), ["ACCOUNTANT_LEDGER"] = null };
        foreach (var (name, value) in set) environment[name] = value;
        return environment;
    }

    private static void AssertNoSecret(Processes.Finished run)
    {
        Assert.DoesNotContain(Password, run.Out + run.Err);
    }

    [Fact]
    public void The_password_comes_from_the_address_the_environment_or_a_password_file_and_is_never_shown()
    {
        var init = Processes.RunWith(Clean(), Processes.Cli, "init", "--ledger", Address(Password));
        Assert.True(init.Exit == 0, init.Err);
        AssertNoSecret(init);

        var missing = Processes.RunWith(Clean(), Processes.Cli, "verify", "--ledger", Address());
        Assert.Equal(5, missing.Exit);
        Assert.Contains("asks for a password", missing.Err);
        Assert.Single(missing.Err.Trim().Split('\n'));

        var wrong = Processes.RunWith(Clean(), Processes.Cli, "verify", "--ledger", Address("not-it"));
        Assert.Equal(5, wrong.Exit);
        Assert.Contains("refused the login", wrong.Err);
        Assert.DoesNotContain("not-it", wrong.Err);

        var fromEnvironment = Processes.RunWith(Clean(("PGPASSWORD", Password), ("ACCOUNTANT_LEDGER", Address())), Processes.Cli, "verify");
        Assert.True(fromEnvironment.Exit == 0, fromEnvironment.Err);
        Assert.Contains("chain valid", fromEnvironment.Out);

        var b = new NpgsqlConnectionStringBuilder(_cluster.ConnectionString);
        var passfile = Path.Combine(_folder, "pgpass");
        File.WriteAllText(passfile, $"{b.Host}:{b.Port}:*:{b.Username}:{Password}\n");
        if (!OperatingSystem.IsWindows()) File.SetUnixFileMode(passfile, UnixFileMode.UserRead | UnixFileMode.UserWrite);
        var fromFile = Processes.RunWith(Clean(("PGPASSFILE", passfile)), Processes.Cli, "verify", "--ledger", Address());
        Assert.True(fromFile.Exit == 0, fromFile.Err);
        var fromParameter = Processes.RunWith(Clean(), Processes.Cli, "verify", "--ledger", Address(query: "?schema=team&passfile=" + Uri.EscapeDataString(passfile)));
        Assert.True(fromParameter.Exit == 0, fromParameter.Err);
        foreach (var run in new[] { missing, wrong, fromEnvironment, fromFile, fromParameter }) AssertNoSecret(run);
    }
}
