using System.Globalization;
using System.Text;
using System.Text.Json;
using Accountant.Search.Data;

namespace Accountant.Search.Trainers;

/// <summary>
/// The search space as a JSON file: <c>{"trainers":[{"trainer":"fasttree","parameters":{"leaves":{"scale":"log-integer","low":2,"high":128}}}]}</c>.
/// Scales: <c>uniform</c>, <c>log-uniform</c>, <c>integer</c>, <c>log-integer</c> (with <c>low</c> and <c>high</c>) and
/// <c>choice</c> (with <c>values</c>). A trainer may name only some of its hyperparameters; the rest keep their default ranges.
/// </summary>
public static class SpaceFile
{
    private static readonly Dictionary<string, ParameterScale> Scales = new(StringComparer.Ordinal)
    {
        ["uniform"] = ParameterScale.Uniform,
        ["log-uniform"] = ParameterScale.LogUniform,
        ["integer"] = ParameterScale.Integer,
        ["log-integer"] = ParameterScale.LogInteger,
        ["choice"] = ParameterScale.Choice,
    };

    public static string Write(IReadOnlyList<TrainerSpace> space)
    {
        using var stream = new MemoryStream();
        using (var w = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true }))
        {
            w.WriteStartObject();
            w.WriteStartArray("trainers");
            foreach (var trainer in space)
            {
                w.WriteStartObject();
                w.WriteString("trainer", trainer.Trainer);
                w.WriteStartObject("parameters");
                foreach (var p in trainer.Parameters)
                {
                    w.WriteStartObject(p.Name);
                    w.WriteString("scale", Scales.First(s => s.Value == p.Scale).Key);
                    if (p.Scale == ParameterScale.Choice)
                    {
                        w.WriteStartArray("values");
                        foreach (var v in p.Choices!) w.WriteNumberValue(v);
                        w.WriteEndArray();
                    }
                    else
                    {
                        w.WriteNumber("low", p.Low);
                        w.WriteNumber("high", p.High);
                    }

                    w.WriteEndObject();
                }

                w.WriteEndObject();
                w.WriteEndObject();
            }

            w.WriteEndArray();
            w.WriteEndObject();
        }

        return Encoding.UTF8.GetString(stream.ToArray()) + Environment.NewLine;
    }

    public static IReadOnlyList<TrainerSpace> Read(string path, TaskKind task)
    {
        string text;
        try
        {
            text = File.ReadAllText(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw AccountantException.BadInput($"the search space file '{path}' cannot be read ({e.Message.TrimEnd('.')}); check the path.");
        }

        return Parse(text, path, task);
    }

    public static IReadOnlyList<TrainerSpace> Parse(string text, string source, TaskKind task)
    {
        var defaults = TrainerCatalog.DefaultSpace(task).ToDictionary(s => s.Trainer, StringComparer.Ordinal);
        AccountantException Bad(string what) => AccountantException.BadInput($"the search space '{source}' {what}; start from 'accountant search --print-space'.");
        JsonDocument document;
        try
        {
            document = JsonDocument.Parse(text);
        }
        catch (JsonException)
        {
            throw Bad("is not valid JSON");
        }

        using (document)
        {
            if (document.RootElement.ValueKind != JsonValueKind.Object || !document.RootElement.TryGetProperty("trainers", out var trainers) || trainers.ValueKind != JsonValueKind.Array || trainers.GetArrayLength() == 0)
            {
                throw Bad("needs a non-empty \"trainers\" array");
            }

            var result = new List<TrainerSpace>();
            foreach (var entry in trainers.EnumerateArray())
            {
                if (entry.ValueKind != JsonValueKind.Object || !entry.TryGetProperty("trainer", out var nameElement) || nameElement.ValueKind != JsonValueKind.String)
                {
                    throw Bad("has a trainer entry without a \"trainer\" name");
                }

                var name = nameElement.GetString()!;
                if (!defaults.TryGetValue(name, out var template))
                {
                    throw Bad($"names the trainer '{name}', which {task.ToString().ToLowerInvariant()} tasks do not have (they have {string.Join(", ", defaults.Keys)})");
                }

                var ranges = template.Parameters.ToDictionary(p => p.Name, StringComparer.Ordinal);
                if (entry.TryGetProperty("parameters", out var parameters))
                {
                    if (parameters.ValueKind != JsonValueKind.Object) throw Bad($"gives '{name}' parameters that are not an object");
                    foreach (var parameter in parameters.EnumerateObject())
                    {
                        if (!ranges.ContainsKey(parameter.Name))
                        {
                            throw Bad($"gives '{name}' the unknown hyperparameter '{parameter.Name}' (it has {string.Join(", ", ranges.Keys)})");
                        }

                        ranges[parameter.Name] = Range(parameter.Name, parameter.Value, ranges[parameter.Name], Bad);
                    }
                }

                result.Add(new TrainerSpace(name, template.Parameters.Select(p => ranges[p.Name]).ToList()));
            }

            return result;
        }
    }

    private static ParameterRange Range(string name, JsonElement value, ParameterRange template, Func<string, AccountantException> bad)
    {
        if (value.ValueKind != JsonValueKind.Object || !value.TryGetProperty("scale", out var scaleElement) || scaleElement.ValueKind != JsonValueKind.String
            || !Scales.TryGetValue(scaleElement.GetString()!, out var scale))
        {
            throw bad($"gives '{name}' no \"scale\" among {string.Join(", ", Scales.Keys)}");
        }

        var whole = template.IsWhole;
        if (scale == ParameterScale.Choice)
        {
            if (!value.TryGetProperty("values", out var values) || values.ValueKind != JsonValueKind.Array || values.GetArrayLength() == 0
                || values.EnumerateArray().Any(v => v.ValueKind != JsonValueKind.Number))
            {
                throw bad($"gives '{name}' a choice without a non-empty \"values\" array of numbers");
            }

            var list = values.EnumerateArray().Select(v => v.GetDouble()).ToList();
            if (list.Any(v => v < template.Low || v > template.High) || (whole && list.Any(v => v != Math.Floor(v))))
            {
                throw bad($"gives '{name}' choices outside [{Text(template.Low)}, {Text(template.High)}]{(whole ? " or not whole numbers" : "")}");
            }

            return ParameterRange.Choice(name, list);
        }

        if (!value.TryGetProperty("low", out var lowElement) || !value.TryGetProperty("high", out var highElement)
            || lowElement.ValueKind != JsonValueKind.Number || highElement.ValueKind != JsonValueKind.Number)
        {
            throw bad($"gives '{name}' no numeric \"low\" and \"high\"");
        }

        var low = lowElement.GetDouble();
        var high = highElement.GetDouble();
        if (!(low <= high) || low < template.Low || high > template.High || (scale is ParameterScale.LogUniform or ParameterScale.LogInteger && low <= 0))
        {
            throw bad($"gives '{name}' the range [{Text(low)}, {Text(high)}], which must lie within [{Text(template.Low)}, {Text(template.High)}] with low ≤ high (and low > 0 on a log scale)");
        }

        if (whole != (scale is ParameterScale.Integer or ParameterScale.LogInteger))
        {
            throw bad($"gives '{name}' the scale '{scaleElement.GetString()}', but it takes {(whole ? "whole numbers (integer or log-integer)" : "real numbers (uniform or log-uniform)")}");
        }

        return new ParameterRange(name, low, high, scale);
    }

    private static string Text(double x) => x.ToString("R", CultureInfo.InvariantCulture);
}
