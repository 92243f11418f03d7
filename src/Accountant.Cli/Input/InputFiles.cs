using System.Globalization;
using System.Text.Json;
using Accountant.Input;
using Accountant.Ledger;

namespace Accountant.Cli.Input;

/// <summary>Reads the files the verbs take: labels, predictions, configurations and imports.</summary>
internal static class InputFiles
{
    public static List<HoldoutExample> Labels(string path, string idColumn, string labelColumn)
    {
        var table = CsvTable.Load(path);
        var id = table.Column(idColumn, "--id-column");
        var label = table.Column(labelColumn, "--label-column");
        return table.Rows.Select(row => new HoldoutExample(row[id], row[label])).ToList();
    }

    /// <summary>Predictions as CSV: an id column, a prediction column and, optionally, the label the predictor saw.</summary>
    public static Prediction[] Predictions(string path, string idColumn = "id", string predictionColumn = "prediction", string labelColumn = "label")
    {
        var table = CsvTable.Load(path);
        var id = table.Column(idColumn, "--id-column");
        var prediction = table.Column(predictionColumn, "--prediction-column");
        var label = table.Has(labelColumn) ? table.Column(labelColumn, "--label-column") : -1;
        // An array filled in a loop: a list of this value type would be compiled at run time on every 'accountant record'.
        var predictions = new Prediction[table.Rows.Count];
        for (var i = 0; i < predictions.Length; i++)
        {
            var row = table.Rows[i];
            predictions[i] = new Prediction(row[id], row[prediction], label >= 0 ? row[label] : null);
        }

        return predictions;
    }

    /// <summary>A configuration given inline, or as @file.json.</summary>
    public static string Configuration(string value)
    {
        if (!value.StartsWith('@'))
        {
            return value;
        }

        var path = value[1..];
        try
        {
            return CsvTable.Decode(File.ReadAllBytes(path), path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw AccountantException.BadInput($"the configuration file '{path}' cannot be read ({e.Message.TrimEnd('.')}); check the path after '@'.");
        }
    }

    /// <summary>One line of an import, ready to record, and where it came from.</summary>
    public sealed record ImportedLook(LookInput Input, int Line);

    /// <summary>
    /// Reads an import file: JSON Lines (one object per line with <c>configuration</c>, and <c>score</c> or
    /// <c>predictions</c>, a path relative to the import file; optional <c>search</c> and <c>stage</c>), or CSV with a
    /// <c>score</c> column where every other column is a hyperparameter. Chosen by extension (.jsonl, .ndjson, .json
    /// or .csv), else by the first character.
    /// </summary>
    public static List<ImportedLook> Import(string path, string? search)
    {
        byte[] bytes;
        try
        {
            bytes = File.ReadAllBytes(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw AccountantException.BadInput($"the import file '{path}' cannot be read ({e.Message.TrimEnd('.')}); check the path.");
        }

        var text = CsvTable.Decode(bytes, path);
        var extension = Path.GetExtension(path).ToLowerInvariant();
        var jsonLines = extension is ".jsonl" or ".ndjson" or ".json" || (extension != ".csv" && text.TrimStart().StartsWith('{'));
        var looks = jsonLines ? JsonLines(text, path, search) : Csv(text, path, search);
        if (looks.Count == 0)
        {
            throw AccountantException.BadInput($"the import file '{path}' holds no looks; give one JSON object per line, or a CSV with a header and rows.");
        }

        return looks;
    }

    private static List<ImportedLook> JsonLines(string text, string path, string? search)
    {
        var folder = Path.GetDirectoryName(Path.GetFullPath(path)) ?? ".";
        var looks = new List<ImportedLook>();
        var lines = text.Split(["\r\n", "\n", "\r"], StringSplitOptions.None);
        for (var i = 0; i < lines.Length; i++)
        {
            var line = lines[i].Trim();
            if (line.Length == 0) continue;
            var number = i + 1;
            string Where() => $"'{path}' line {number}";
            JsonDocument document;
            try
            {
                document = JsonDocument.Parse(line);
            }
            catch (JsonException)
            {
                throw AccountantException.BadInput($"{Where()} is not valid JSON; give one JSON object per line, such as {{\"configuration\":{{\"leaves\":31}},\"score\":0.12}}. Nothing was imported.");
            }

            using (document)
            {
                var root = document.RootElement;
                if (root.ValueKind != JsonValueKind.Object)
                {
                    throw AccountantException.BadInput($"{Where()} is not a JSON object; give one object per line. Nothing was imported.");
                }

                if (!root.TryGetProperty("configuration", out var configuration) || configuration.ValueKind is not (JsonValueKind.Object or JsonValueKind.String))
                {
                    throw AccountantException.BadInput($"{Where()} has no \"configuration\" object; give the hyperparameters as \"configuration\":{{...}}. Nothing was imported.");
                }

                var hasScore = root.TryGetProperty("score", out var score);
                var hasPredictions = root.TryGetProperty("predictions", out var predictions);
                if (hasScore == hasPredictions)
                {
                    throw AccountantException.BadInput($"{Where()} must have exactly one of \"score\" (a number) and \"predictions\" (a CSV path). Nothing was imported.");
                }

                double? value = null;
                Prediction[]? predicted = null;
                if (hasScore)
                {
                    if (score.ValueKind != JsonValueKind.Number || !score.TryGetDouble(out var parsed))
                    {
                        throw AccountantException.BadInput($"{Where()} has a \"score\" that is not a number; write it as a plain JSON number such as 0.12. Nothing was imported.");
                    }

                    value = parsed;
                }
                else
                {
                    if (predictions.ValueKind != JsonValueKind.String || string.IsNullOrWhiteSpace(predictions.GetString()))
                    {
                        throw AccountantException.BadInput($"{Where()} has a \"predictions\" value that is not a file path; give the path of a CSV with id,prediction columns. Nothing was imported.");
                    }

                    var file = Path.Combine(folder, predictions.GetString()!);
                    try
                    {
                        predicted = Predictions(file);
                    }
                    catch (AccountantException e)
                    {
                        throw new AccountantException(e.Kind, $"{Where()}: {e.Message} Nothing was imported.", e);
                    }
                }

                var adaptive = false;
                if (root.TryGetProperty("adaptive", out var adaptiveValue))
                {
                    adaptive = adaptiveValue.ValueKind switch
                    {
                        JsonValueKind.True => true,
                        JsonValueKind.False or JsonValueKind.Null => false,
                        _ => throw AccountantException.BadInput($"{Where()} has an \"adaptive\" that is not true or false. Nothing was imported."),
                    };
                }

                double? train = null;
                if (root.TryGetProperty("trainScore", out var trainValue) && trainValue.ValueKind != JsonValueKind.Null)
                {
                    train = trainValue.ValueKind == JsonValueKind.Number && trainValue.TryGetDouble(out var t) ? t
                        : throw AccountantException.BadInput($"{Where()} has a \"trainScore\" that is not a number. Nothing was imported.");
                }

                Guards.GuardSpec? guard;
                try
                {
                    guard = OptionalString(root, "guard", Where) is { } g ? Guards.GuardSpec.Parse(g) : null;
                }
                catch (AccountantException e)
                {
                    throw AccountantException.BadInput($"{Where()}: {e.Message} Nothing was imported.");
                }

                looks.Add(new ImportedLook(new LookInput
                {
                    Configuration = configuration.ValueKind == JsonValueKind.String ? configuration.GetString()! : configuration.GetRawText(),
                    Score = value,
                    Predictions = predicted,
                    Search = OptionalString(root, "search", Where) ?? search,
                    Stage = OptionalString(root, "stage", Where),
                    Adaptive = adaptive,
                    Guard = guard,
                    Stream = OptionalString(root, "stream", Where),
                    TrainScore = train,
                }, number));
            }
        }

        return looks;
    }

    private static string? OptionalString(JsonElement root, string name, Func<string> where)
    {
        if (!root.TryGetProperty(name, out var value) || value.ValueKind == JsonValueKind.Null) return null;
        if (value.ValueKind == JsonValueKind.String) return value.GetString();
        if (value.ValueKind == JsonValueKind.Number) return value.GetRawText();
        throw AccountantException.BadInput($"{where()} has a \"{name}\" that is not a string; give it as text. Nothing was imported.");
    }

    private static List<ImportedLook> Csv(string text, string path, string? search)
    {
        var table = CsvTable.Parse(text, path);
        var scoreColumn = table.Column("score", "a 'score' column (the CSV import format)");
        var looks = new List<ImportedLook>();
        for (var r = 0; r < table.Rows.Count; r++)
        {
            var row = table.Rows[r];
            var line = table.Lines[r];
            if (!double.TryParse(row[scoreColumn].Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out var score))
            {
                throw AccountantException.BadInput($"'{path}' line {line}: the score '{Text(row[scoreColumn])}' is not a number; write it with a '.' decimal point, such as 0.12. Nothing was imported.");
            }

            using var stream = new MemoryStream();
            using (var writer = new Utf8JsonWriter(stream))
            {
                writer.WriteStartObject();
                for (var c = 0; c < table.Header.Count; c++)
                {
                    if (c == scoreColumn) continue;
                    var cell = row[c].Trim();
                    writer.WritePropertyName(table.Header[c]);
                    if (cell.Length == 0) writer.WriteNullValue();
                    else if (double.TryParse(cell, NumberStyles.Float, CultureInfo.InvariantCulture, out var number) && double.IsFinite(number)) writer.WriteNumberValue(number);
                    else if (cell is "true" or "false") writer.WriteBooleanValue(cell == "true");
                    else writer.WriteStringValue(cell);
                }

                writer.WriteEndObject();
            }

            looks.Add(new ImportedLook(new LookInput { Configuration = System.Text.Encoding.UTF8.GetString(stream.ToArray()), Score = score, Search = search }, line));
        }

        return looks;
    }

    private static string Text(string value) => value.Length <= 40 ? value : value[..37] + "...";
}
