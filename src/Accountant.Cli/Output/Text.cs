using System.Globalization;

namespace Accountant.Cli.Output;

/// <summary>Culture-invariant number formatting for every human-readable output.</summary>
internal static class Text
{
    public static string N(double value, int digits = 4) =>
        double.IsNaN(value) ? "n/a" : value.ToString("F" + digits.ToString(CultureInfo.InvariantCulture), CultureInfo.InvariantCulture);

    public static string Count(long value) =>
        value == long.MaxValue ? "unlimited" : value.ToString("#,0", CultureInfo.InvariantCulture);

    public static string Percent(double confidence) => (confidence * 100).ToString("0.###", CultureInfo.InvariantCulture) + "%";

    public static string Duration(TimeSpan time) =>
        time.TotalHours >= 1 ? time.ToString(@"h\:mm\:ss", CultureInfo.InvariantCulture) : time.ToString(@"m\:ss", CultureInfo.InvariantCulture);

    public static string Short(string text, int length) => text.Length <= length ? text : text[..(length - 1)] + "…";
}
