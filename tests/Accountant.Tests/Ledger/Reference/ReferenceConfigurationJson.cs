using System.Buffers;
using System.Security.Cryptography;
using System.Text;
using System.Text.Encodings.Web;
using System.Text.Json;

namespace Accountant.Tests.Ledger.Reference;

using Accountant.Ledger;

/// <summary>
/// The canonicalizer as it was before the reader-based one (JsonDocument, sorted members, Utf8JsonWriter with relaxed
/// escaping), kept unchanged as the reference the production code must match byte for byte.
/// Canonical JSON for configurations: an object, keys sorted by ordinal, no insignificant whitespace, numbers
/// kept as written, strings re-encoded without escaping non-ASCII text. The digest is SHA-256 of its UTF-8 bytes.
/// </summary>
public static class ReferenceConfigurationJson
{
    [ThreadStatic] private static ArrayBufferWriter<byte>? t_buffer;
    [ThreadStatic] private static Utf8JsonWriter? t_writer;

    private static readonly JsonWriterOptions WriterOptions = new()
    {
        Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping,
        Indented = false,
    };

    /// <summary>The canonical form of a configuration, or a bad-input error naming what is wrong with it.</summary>
    public static string Canonicalize(string json)
    {
        JsonDocument document;
        try
        {
            document = JsonDocument.Parse(json, new JsonDocumentOptions { AllowTrailingCommas = false, CommentHandling = JsonCommentHandling.Disallow, MaxDepth = 64 });
        }
        catch (JsonException e)
        {
            throw AccountantException.BadInput($"the configuration is not valid JSON ({FirstSentence(e.Message)}); give an object such as {{\"trainer\":\"fasttree\",\"leaves\":31}}.");
        }

        using (document)
        {
            if (document.RootElement.ValueKind != JsonValueKind.Object)
            {
                throw AccountantException.BadInput("the configuration must be a JSON object, such as {\"trainer\":\"fasttree\",\"leaves\":31}.");
            }

            // One buffer and writer per thread, reused: canonicalization runs once per look in a batch ingest.
            var buffer = t_buffer ??= new ArrayBufferWriter<byte>(256);
            buffer.ResetWrittenCount();
            var writer = t_writer ??= new Utf8JsonWriter(buffer, WriterOptions);
            writer.Reset(buffer);
            Write(writer, document.RootElement);
            writer.Flush();
            return Encoding.UTF8.GetString(buffer.WrittenSpan);
        }
    }

    public static string Digest(string canonical) =>
        Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(canonical)));

    private static void Write(Utf8JsonWriter writer, JsonElement element)
    {
        switch (element.ValueKind)
        {
            case JsonValueKind.Object:
                var properties = element.EnumerateObject().ToArray();
                var names = new string[properties.Length];
                for (var i = 0; i < properties.Length; i++) names[i] = properties[i].Name;
                // A stable ordinal sort; a key given twice ends up next to itself.
                Array.Sort(names, properties, StringComparer.Ordinal);
                for (var i = 1; i < names.Length; i++)
                {
                    if (string.Equals(names[i - 1], names[i], StringComparison.Ordinal))
                    {
                        throw AccountantException.BadInput($"the configuration names the key '{Losses.Shorten(names[i])}' twice; give each hyperparameter once.");
                    }
                }

                writer.WriteStartObject();
                foreach (var property in properties)
                {
                    writer.WritePropertyName(property.Name);
                    Write(writer, property.Value);
                }

                writer.WriteEndObject();
                break;
            case JsonValueKind.Array:
                writer.WriteStartArray();
                foreach (var item in element.EnumerateArray()) Write(writer, item);
                writer.WriteEndArray();
                break;
            case JsonValueKind.String:
                writer.WriteStringValue(element.GetString());
                break;
            case JsonValueKind.Number:
                writer.WriteRawValue(element.GetRawText(), skipInputValidation: true);
                break;
            case JsonValueKind.True:
                writer.WriteBooleanValue(true);
                break;
            case JsonValueKind.False:
                writer.WriteBooleanValue(false);
                break;
            default:
                writer.WriteNullValue();
                break;
        }
    }

    private static string FirstSentence(string message)
    {
        var cut = message.IndexOf(". ", StringComparison.Ordinal);
        return (cut > 0 ? message[..cut] : message).TrimEnd('.');
    }
}
