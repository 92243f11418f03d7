using System.Globalization;

namespace Accountant.Bounds;

/// <summary>Argument checks shared by the bound functions. Each names the option that sets the value.</summary>
internal static class Require
{
    public static void Looks(long looks)
    {
        if (looks < 1)
        {
            throw AccountantException.BadArguments($"the number of looks must be at least 1 (got {looks}); give --looks a positive count.");
        }
    }

    public static void Size(long n)
    {
        if (n < 1)
        {
            throw AccountantException.BadArguments($"the holdout size must be at least 1 (got {n}).");
        }
    }

    public static void Delta(double delta)
    {
        if (!(delta > 0.0 && delta < 1.0))
        {
            throw AccountantException.BadArguments($"the confidence must lie strictly between 0 and 1 (δ = {delta.ToString(CultureInfo.InvariantCulture)}); give --confidence as, for example, 0.95.");
        }
    }

    public static void Tolerance(double tolerance)
    {
        if (!(tolerance > 0.0) || !double.IsFinite(tolerance))
        {
            throw AccountantException.BadArguments($"the tolerance must be a positive number (got {tolerance.ToString(CultureInfo.InvariantCulture)}); give --tolerance as, for example, 0.02.");
        }
    }
}
