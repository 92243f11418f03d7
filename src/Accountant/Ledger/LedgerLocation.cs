using System.Globalization;
using Npgsql;

namespace Accountant.Ledger;

/// <summary>
/// Where a ledger lives, as given to <c>--ledger</c> or <c>ACCOUNTANT_LEDGER</c>: a file path (SQLite), a PostgreSQL URI
/// (<c>postgresql://user@host:port/database?schema=NAME</c>) or a PostgreSQL key=value connection string with a
/// <c>Host</c> key. <see cref="Display"/> is safe to print: it never contains a password.
/// </summary>
public sealed class LedgerLocation
{
    private LedgerLocation(string? path, NpgsqlConnectionStringBuilder? postgres)
    {
        FilePath = path;
        Postgres = postgres;
    }

    /// <summary>The SQLite file, or null for a PostgreSQL ledger.</summary>
    public string? FilePath { get; }

    /// <summary>The PostgreSQL connection settings, or null for a SQLite ledger.</summary>
    public NpgsqlConnectionStringBuilder? Postgres { get; }

    public bool IsPostgres => Postgres is not null;

    /// <summary>The location for messages: the path, or the PostgreSQL address without any password.</summary>
    public string Display => FilePath ?? DisplayPostgres(Postgres!);

    public override string ToString() => Display;

    public static bool LooksLikePostgres(string text) =>
        text.StartsWith("postgresql://", StringComparison.OrdinalIgnoreCase) || text.StartsWith("postgres://", StringComparison.OrdinalIgnoreCase) ||
        (text.Contains('=') && text.Split(';').Any(part => part.Split('=', 2)[0].Trim().Equals("Host", StringComparison.OrdinalIgnoreCase)));

    public static LedgerLocation Parse(string text)
    {
        if (string.IsNullOrWhiteSpace(text))
        {
            throw AccountantException.BadArguments("the ledger location is empty; give --ledger a file path or a postgresql:// address.");
        }

        if (!LooksLikePostgres(text)) return new LedgerLocation(text, null);
        var builder = text.Contains("://", StringComparison.Ordinal) ? FromUri(text) : FromKeywords(text);
        if (string.IsNullOrEmpty(builder.Database))
        {
            throw AccountantException.BadArguments($"the PostgreSQL ledger address {DisplayPostgres(builder)} names no database; add one (postgresql://host/DATABASE or Database=NAME).");
        }

        // A ledger connection is short-lived and used by one thread; the pool would only keep idle server processes.
        builder.Pooling = false;
        builder.ApplicationName ??= "accountant";
        return new LedgerLocation(null, builder);
    }

    private static NpgsqlConnectionStringBuilder FromKeywords(string text)
    {
        try
        {
            return new NpgsqlConnectionStringBuilder(text);
        }
        catch (ArgumentException e)
        {
            // The message names the key, never its value, so a password cannot leak through it.
            throw AccountantException.BadArguments($"the PostgreSQL connection string could not be read ({Redact(e.Message)}); use Host=...;Database=...;Username=... or a postgresql:// address.");
        }
    }

    /// <summary>
    /// Reads a URI in the form PostgreSQL's own clients accept (RFC 3986; user, password, host, port, database, and the
    /// query parameters below), since Npgsql takes key=value strings only.
    /// </summary>
    private static NpgsqlConnectionStringBuilder FromUri(string text)
    {
        if (!Uri.TryCreate(text, UriKind.Absolute, out var uri))
        {
            throw AccountantException.BadArguments("the PostgreSQL address is not a valid URI; write it as postgresql://USER@HOST:PORT/DATABASE.");
        }

        var builder = new NpgsqlConnectionStringBuilder();
        if (uri.Host.Length > 0) builder.Host = uri.Host.Trim('[', ']');
        if (uri.Port > 0) builder.Port = uri.Port;
        if (uri.UserInfo.Length > 0)
        {
            var parts = uri.UserInfo.Split(':', 2);
            builder.Username = Uri.UnescapeDataString(parts[0]);
            if (parts.Length == 2) builder.Password = Uri.UnescapeDataString(parts[1]);
        }

        var database = Uri.UnescapeDataString(uri.AbsolutePath.TrimStart('/'));
        if (database.Length > 0) builder.Database = database;
        foreach (var pair in uri.Query.TrimStart('?').Split('&', StringSplitOptions.RemoveEmptyEntries))
        {
            var kv = pair.Split('=', 2);
            var key = Uri.UnescapeDataString(kv[0]);
            var value = kv.Length == 2 ? Uri.UnescapeDataString(kv[1].Replace('+', ' ')) : "";
            switch (key.ToLowerInvariant())
            {
                case "host": builder.Host = value; break; // e.g. a socket folder
                case "port": builder.Port = int.Parse(value, CultureInfo.InvariantCulture); break;
                case "user": builder.Username = value; break;
                case "password": builder.Password = value; break;
                case "dbname": builder.Database = value; break;
                case "passfile": builder.Passfile = value; break;
                case "sslmode": builder.SslMode = Enum.Parse<SslMode>(value.Replace("-", ""), ignoreCase: true); break;
                case "application_name": builder.ApplicationName = value; break;
                case "connect_timeout": builder.Timeout = int.Parse(value, CultureInfo.InvariantCulture); break;
                case "schema": builder.SearchPath = value; break;
                default:
                    throw AccountantException.BadArguments($"the PostgreSQL address has an unknown parameter '{key}'; use host, port, user, dbname, passfile, sslmode, application_name, connect_timeout or schema.");
            }
        }

        return builder;
    }

    private static string DisplayPostgres(NpgsqlConnectionStringBuilder b)
    {
        var user = string.IsNullOrEmpty(b.Username) ? "" : Uri.EscapeDataString(b.Username) + "@";
        var port = b.Port == NpgsqlConnection.DefaultPort ? "" : ":" + b.Port.ToString(CultureInfo.InvariantCulture);
        var schema = string.IsNullOrEmpty(b.SearchPath) ? "" : "?schema=" + Uri.EscapeDataString(b.SearchPath);
        return $"postgresql://{user}{b.Host}{port}/{b.Database}{schema}";
    }

    private static string Redact(string message)
    {
        var at = message.IndexOf("password", StringComparison.OrdinalIgnoreCase);
        return at < 0 ? message.TrimEnd('.') : message[..at].TrimEnd() + " …";
    }
}
