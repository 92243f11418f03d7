using System.Globalization;

namespace Accountant.Search.Data;

/// <summary>What is predicted.</summary>
public enum TaskKind
{
    Binary,
    Multiclass,
    Regression,
}

/// <summary>A feature column as read: numeric (missing values allowed) or categorical.</summary>
public sealed record FeatureColumn(string Name, int Index, bool Numeric);

/// <summary>
/// How a search reads a cell. Values "", "NA", "N/A", "NaN", "?" and "null" (any case, spaces around ignored) are
/// missing. A column is numeric when every present value reads as a finite number (invariant culture); otherwise it is
/// categorical.
/// </summary>
public static class Cells
{
    public static readonly string[] MissingTokens = ["", "na", "n/a", "nan", "?", "null"];

    public static bool IsMissing(string value) => IsMissing(value.AsSpan());

    public static bool IsMissing(ReadOnlySpan<char> value)
    {
        var v = value.Trim();
        if (v.Length == 0) return true;
        if (v.Length > 4 || char.IsAsciiDigit(v[0])) return false;
        foreach (var token in MissingTokens)
        {
            if (v.Equals(token, StringComparison.OrdinalIgnoreCase)) return true;
        }

        return false;
    }

    public static bool TryNumber(string value, out double number) => TryNumber(value.AsSpan(), out number);

    public static bool TryNumber(ReadOnlySpan<char> value, out double number) =>
        double.TryParse(value.Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out number) && double.IsFinite(number);

    /// <summary>A cell as quoted in a message: at most 60 characters, control characters escaped, so the message stays one line.</summary>
    public static string Shown(ReadOnlySpan<char> cell)
    {
        var text = cell.Length <= 60 ? cell.ToString() : string.Concat(cell[..57], "...");
        return string.Concat(text.Select(c => char.IsControl(c) ? $"\\u{(int)c:x4}" : c.ToString()));
    }

    /// <summary>A number as the ledger keeps it as a label (<see cref="Ledger.Fingerprint.CanonicalLabel"/> of its text).</summary>
    public static string Canonical(double value) => value == 0.0 ? "0" : value.ToString("R", CultureInfo.InvariantCulture);
}
