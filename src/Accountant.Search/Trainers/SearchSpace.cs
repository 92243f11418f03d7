using System.Globalization;
using System.Text;

namespace Accountant.Search.Trainers;

/// <summary>How a hyperparameter's values are drawn.</summary>
public enum ParameterScale
{
    /// <summary>Uniform on [Low, High].</summary>
    Uniform,
    /// <summary>log-uniform on [Low, High]: for rates and penalties spanning decades.</summary>
    LogUniform,
    /// <summary>A whole number, uniform on [Low, High].</summary>
    Integer,
    /// <summary>A whole number, log-uniform on [Low, High]: for counts spanning decades.</summary>
    LogInteger,
    /// <summary>One of a list of values, each equally likely.</summary>
    Choice,
}

/// <summary>One hyperparameter's range.</summary>
public sealed record ParameterRange(string Name, double Low, double High, ParameterScale Scale, IReadOnlyList<double>? Choices = null)
{
    public static ParameterRange Choice(string name, IReadOnlyList<double> values) =>
        values.Count == 0 ? throw AccountantException.BadInput($"the choice for '{name}' lists no values.") : new(name, values.Min(), values.Max(), ParameterScale.Choice, values);

    /// <summary>Draws a value. Continuous values keep four significant digits, so the configuration recorded is the one trained.</summary>
    public double Sample(Random random)
    {
        var u = random.NextDouble();
        return Scale switch
        {
            ParameterScale.Choice => Choices![Math.Min(Choices.Count - 1, (int)(u * Choices.Count))],
            ParameterScale.Uniform => RoundSignificant(Low + u * (High - Low)),
            ParameterScale.LogUniform => RoundSignificant(Math.Exp(Math.Log(Low) + u * (Math.Log(High) - Math.Log(Low)))),
            ParameterScale.Integer => Math.Floor(Low + u * (High - Low + 1)),
            ParameterScale.LogInteger => Math.Min(High, Math.Floor(Math.Exp(Math.Log(Low) + u * (Math.Log(High + 1) - Math.Log(Low))))),
            _ => throw new ArgumentOutOfRangeException(nameof(Scale)),
        };
    }

    public bool IsWhole => Scale is ParameterScale.Integer or ParameterScale.LogInteger || (Scale == ParameterScale.Choice && Choices!.All(c => c == Math.Floor(c)));

    /// <summary>Evenly spread values for a grid: <paramref name="points"/> of them on the range's own scale (all choices for a choice).</summary>
    public IReadOnlyList<double> GridValues(int points)
    {
        if (Scale == ParameterScale.Choice) return Choices!;
        if (points <= 1) return [IsWhole ? Math.Round(From(0.5 * (To(Low) + To(High)))) : RoundSignificant(From(0.5 * (To(Low) + To(High))))];
        var values = Enumerable.Range(0, points).Select(i => From(To(Low) + i * (To(High) - To(Low)) / (points - 1)))
            .Select(v => IsWhole ? Math.Round(v) : RoundSignificant(v)).Distinct().ToList();
        return values;
    }

    private double To(double x) => IsLog ? Math.Log(x) : x;

    private double From(double x) => IsLog ? Math.Exp(x) : x;

    private bool IsLog => Scale is ParameterScale.LogUniform or ParameterScale.LogInteger;

    /// <summary>
    /// A value near <paramref name="value"/>: a uniform step of at most <paramref name="fraction"/> of the range, measured on
    /// the range's own scale (log for log ranges), clamped into the range. Whole-number ranges always move by at least one
    /// when they can.
    /// </summary>
    public double Perturb(double value, Random random, double fraction)
    {
        if (Scale == ParameterScale.Choice)
        {
            var choices = Choices!;
            var at = Math.Max(0, choices.ToList().IndexOf(value));
            return choices[Math.Clamp(at + (random.NextDouble() < 0.5 ? -1 : 1), 0, choices.Count - 1)];
        }

        var span = To(High) - To(Low);
        var moved = From(Math.Clamp(To(value) + (2 * random.NextDouble() - 1) * fraction * span, To(Low), To(High)));
        if (!IsWhole) return Math.Clamp(RoundSignificant(moved), Low, High);
        var whole = Math.Clamp(Math.Round(moved), Low, High);
        if (whole == value && High > Low) whole = Math.Clamp(value + (random.NextDouble() < 0.5 ? -1 : 1), Low, High);
        return whole;
    }

    private static double RoundSignificant(double value) =>
        value == 0 ? 0 : Math.Round(value, Math.Max(0, 3 - (int)Math.Floor(Math.Log10(Math.Abs(value)))));
}

/// <summary>A trainer and the ranges of its hyperparameters.</summary>
public sealed record TrainerSpace(string Trainer, IReadOnlyList<ParameterRange> Parameters)
{
    public TrainerConfiguration Sample(Random random) =>
        new(Trainer, Parameters.ToDictionary(p => p.Name, p => p.Sample(random)));

    /// <summary>A neighbour of a configuration of this trainer: every hyperparameter nudged (see <see cref="ParameterRange.Perturb"/>).</summary>
    public TrainerConfiguration Neighbour(TrainerConfiguration configuration, Random random, double fraction = 0.15) =>
        new(Trainer, Parameters.ToDictionary(p => p.Name, p => p.Perturb(configuration.Values[p.Name], random, fraction)));
}

/// <summary>A trainer with one value per hyperparameter: what one look scores.</summary>
public sealed record TrainerConfiguration(string Trainer, IReadOnlyDictionary<string, double> Values)
{
    public int Int(string name) => checked((int)Values[name]);

    public double Double(string name) => Values[name];

    /// <summary>The configuration as a JSON object: the trainer first, then the hyperparameters.</summary>
    public string ToJson()
    {
        var builder = new StringBuilder();
        builder.Append("{\"trainer\":\"").Append(Trainer).Append('"');
        foreach (var (name, value) in Values.OrderBy(v => v.Key, StringComparer.Ordinal))
        {
            builder.Append(",\"").Append(name).Append("\":").Append(value.ToString("R", CultureInfo.InvariantCulture));
        }

        return builder.Append('}').ToString();
    }

    public override string ToString() => ToJson();

    /// <summary>Reads back what <see cref="ToJson"/> wrote: a "trainer" name and numeric hyperparameters.</summary>
    public static TrainerConfiguration FromJson(string json)
    {
        using var document = System.Text.Json.JsonDocument.Parse(json);
        var values = new Dictionary<string, double>(StringComparer.Ordinal);
        string? trainer = null;
        foreach (var property in document.RootElement.EnumerateObject())
        {
            if (property.Name == "trainer") trainer = property.Value.GetString();
            else values[property.Name] = property.Value.GetDouble();
        }

        return new TrainerConfiguration(trainer ?? throw new FormatException("the configuration names no trainer"), values);
    }
}
