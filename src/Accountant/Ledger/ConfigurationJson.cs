using System.Buffers;
using System.Security.Cryptography;
using System.Text;
using System.Text.Encodings.Web;
using System.Text.Json;

namespace Accountant.Ledger;

/// <summary>
/// Canonical JSON for configurations: an object, keys sorted by ordinal, no insignificant whitespace, numbers
/// kept as written, strings re-encoded without escaping non-ASCII text. The digest is SHA-256 of its UTF-8 bytes.
/// </summary>
/// <remarks>
/// One pass of <see cref="Utf8JsonReader"/> (RFC 8259 grammar) records the tokens; objects are then written with their
/// members sorted. Strings and names that are plain printable ASCII without escapes are copied as they stand, since
/// the escaping writer leaves those bytes alone; any other string is decoded and written by the same
/// <see cref="Utf8JsonWriter"/> (relaxed escaping) that has always defined the canonical form, so every canonical
/// configuration keeps its bytes. Input that is already canonical comes back as the same string.
/// </remarks>
public static class ConfigurationJson
{
    private const int MaxDepth = 64;

    [ThreadStatic] private static Canonicalizer? t_canonicalizer;

    /// <summary>The canonical form of a configuration, or a bad-input error naming what is wrong with it.</summary>
    public static string Canonicalize(string json) => (t_canonicalizer ??= new Canonicalizer()).Run(json);

    public static string Digest(string canonical)
    {
        var most = Encoding.UTF8.GetMaxByteCount(canonical.Length);
        var rented = most <= 1024 ? null : ArrayPool<byte>.Shared.Rent(most);
        var bytes = rented ?? stackalloc byte[most];
        var length = Encoding.UTF8.GetBytes(canonical, bytes);
        Span<byte> hash = stackalloc byte[32];
        SHA256.HashData(bytes[..length], hash);
        if (rented is not null) ArrayPool<byte>.Shared.Return(rented);
        return Convert.ToHexStringLower(hash);
    }

    internal static AccountantException NotJson(string reason) =>
        AccountantException.BadInput($"the configuration is not valid JSON ({reason}); give an object such as {{\"trainer\":\"fasttree\",\"leaves\":31}}.");

    internal static string FirstSentence(string message)
    {
        var cut = message.IndexOf(". ", StringComparison.Ordinal);
        return (cut > 0 ? message[..cut] : message).TrimEnd('.');
    }

    /// <summary>One token of the input: where its text lies in the UTF-8 bytes and, for containers, where it ends.</summary>
    private struct Token
    {
        public JsonTokenType Type;
        public int Start;
        public int Length;
        /// <summary>For a start token, the index of its end token; for a name or string, -1 when its bytes can be copied.</summary>
        public int Link;
        /// <summary>The decoded text of a name or string that cannot be copied as it stands.</summary>
        public string? Text;
        /// <summary>A name or string that escapes half of a surrogate pair: reported when the writing reaches it.</summary>
        public bool Unpaired;
    }

    private sealed class Canonicalizer
    {
        private static readonly UTF8Encoding StrictUtf8 = new(encoderShouldEmitUTF8Identifier: false, throwOnInvalidBytes: true);

        private byte[] _input = new byte[256];
        private byte[] _output = new byte[256];
        private int _written;
        private Token[] _tokens = new Token[64];
        private int[] _members = new int[64];
        private readonly int[] _open = new int[MaxDepth + 2];

        public string Run(string json)
        {
            var length = Utf8(json);
            var count = Tokenize(length);
            if (_tokens[0].Type != JsonTokenType.StartObject)
            {
                throw AccountantException.BadInput("the configuration must be a JSON object, such as {\"trainer\":\"fasttree\",\"leaves\":31}.");
            }

            _written = 0;
            var next = Write(0, 0);
            System.Diagnostics.Debug.Assert(next == count);
            var output = _output.AsSpan(0, _written);
            return output.SequenceEqual(_input.AsSpan(0, length)) ? json : Encoding.UTF8.GetString(output);
        }

        private int Utf8(string json)
        {
            var most = Encoding.UTF8.GetMaxByteCount(json.Length);
            if (_input.Length < most) _input = new byte[Math.Max(most, 2 * _input.Length)];
            try
            {
                return StrictUtf8.GetBytes(json, _input);
            }
            catch (EncoderFallbackException)
            {
                throw NotJson("it holds half of a UTF-16 surrogate pair, which is not text");
            }
        }

        /// <summary>Reads every token, so that a syntax error anywhere is reported before anything is written.</summary>
        private int Tokenize(int length)
        {
            var reader = new Utf8JsonReader(_input.AsSpan(0, length), new JsonReaderOptions
            {
                AllowTrailingCommas = false,
                CommentHandling = JsonCommentHandling.Disallow,
                MaxDepth = MaxDepth,
            });
            var count = 0;
            var depth = 0;
            try
            {
                while (reader.Read())
                {
                    if (count == _tokens.Length) Array.Resize(ref _tokens, 2 * count);
                    ref var token = ref _tokens[count];
                    token.Type = reader.TokenType;
                    token.Text = null;
                    token.Link = -1;
                    token.Unpaired = false;
                    switch (reader.TokenType)
                    {
                        case JsonTokenType.StartObject or JsonTokenType.StartArray:
                            _open[depth++] = count;
                            break;
                        case JsonTokenType.EndObject or JsonTokenType.EndArray:
                            _tokens[_open[--depth]].Link = count;
                            break;
                        case JsonTokenType.PropertyName or JsonTokenType.String:
                            token.Start = (int)reader.TokenStartIndex + 1;
                            token.Length = reader.ValueSpan.Length;
                            if (reader.ValueIsEscaped || !PlainAscii(reader.ValueSpan)) token.Text = Decode(ref reader, out token.Unpaired);
                            break;
                        case JsonTokenType.Number:
                            token.Start = (int)reader.TokenStartIndex;
                            token.Length = reader.ValueSpan.Length;
                            break;
                    }

                    count++;
                }
            }
            catch (JsonException e)
            {
                throw NotJson(FirstSentence(e.Message));
            }

            return count;
        }

        private static string? Decode(ref Utf8JsonReader reader, out bool unpaired)
        {
            unpaired = false;
            try
            {
                return reader.GetString()!;
            }
            catch (InvalidOperationException)
            {
                // An escaped lone surrogate ("\ud800"): valid JSON grammar, but not text that can be stored.
                unpaired = true;
                return null;
            }
        }

        private static AccountantException Unpaired() => NotJson("a string escapes half of a UTF-16 surrogate pair, which is not text");

        /// <summary>Printable ASCII other than the quote and backslash: the bytes the relaxed escaping writes unchanged.</summary>
        private static bool PlainAscii(ReadOnlySpan<byte> bytes)
        {
            foreach (var b in bytes)
            {
                if (b < 0x20 || b > 0x7E || b == (byte)'"' || b == (byte)'\\') return false;
            }

            return true;
        }

        /// <summary>Writes the value starting at token <paramref name="index"/>; returns the index after it.</summary>
        /// <param name="stack">Where in the shared stack of member indices this value's objects may keep theirs.</param>
        private int Write(int index, int stack)
        {
            ref var token = ref _tokens[index];
            switch (token.Type)
            {
                case JsonTokenType.StartObject:
                    return WriteObject(index, stack);
                case JsonTokenType.StartArray:
                {
                    Byte((byte)'[');
                    var end = token.Link;
                    var next = index + 1;
                    while (next < end)
                    {
                        if (next > index + 1) Byte((byte)',');
                        next = Write(next, stack);
                    }

                    Byte((byte)']');
                    return end + 1;
                }

                case JsonTokenType.String:
                    WriteString(index);
                    return index + 1;
                case JsonTokenType.Number:
                    Bytes(_input.AsSpan(token.Start, token.Length));
                    return index + 1;
                case JsonTokenType.True:
                    Bytes("true"u8);
                    return index + 1;
                case JsonTokenType.False:
                    Bytes("false"u8);
                    return index + 1;
                default:
                    Bytes("null"u8);
                    return index + 1;
            }
        }

        private int WriteObject(int index, int first)
        {
            var end = _tokens[index].Link;
            // The members' name tokens, gathered on a shared stack of indices (nested objects use the part above).
            var count = 0;
            for (var next = index + 1; next < end;)
            {
                if (_tokens[next].Unpaired) throw Unpaired();
                Reserve(first + count + 1);
                _members[first + count++] = next;
                var value = next + 1;
                next = _tokens[value].Type is JsonTokenType.StartObject or JsonTokenType.StartArray ? _tokens[value].Link + 1 : value + 1;
            }

            var members = _members.AsSpan(first, count);
            Sort(members);
            for (var i = 1; i < members.Length; i++)
            {
                if (Compare(members[i - 1], members[i]) == 0)
                {
                    throw AccountantException.BadInput($"the configuration names the key '{Losses.Shorten(Name(members[i]))}' twice; give each hyperparameter once.");
                }
            }

            Byte((byte)'{');
            for (var i = 0; i < count; i++)
            {
                if (i > 0) Byte((byte)',');
                var name = _members[first + i];
                WriteString(name);
                Byte((byte)':');
                Write(name + 1, first + count);
            }

            Byte((byte)'}');
            return end + 1;
        }

        private void Reserve(int size)
        {
            if (_members.Length < size) Array.Resize(ref _members, Math.Max(size, 2 * _members.Length));
        }

        /// <summary>Ordinal order of the names as .NET strings (UTF-16 code units), as the canonical form has always used.</summary>
        private int Compare(int a, int b)
        {
            ref var x = ref _tokens[a];
            ref var y = ref _tokens[b];
            // Plain ASCII bytes order as their UTF-16 code units do.
            if (x.Text is null && y.Text is null) return _input.AsSpan(x.Start, x.Length).SequenceCompareTo(_input.AsSpan(y.Start, y.Length));
            return string.CompareOrdinal(Name(a), Name(b));
        }

        private string Name(int index)
        {
            ref var token = ref _tokens[index];
            return token.Text ?? Encoding.UTF8.GetString(_input, token.Start, token.Length);
        }

        /// <summary>Insertion sort: linear on members that are already in order (the usual case), fine for the tens of
        /// members a configuration has; large disordered objects go through <see cref="Array.Sort{TKey, TValue}(TKey[], TValue[], IComparer{TKey})"/>.</summary>
        private void Sort(Span<int> members)
        {
            var moves = 0;
            for (var i = 1; i < members.Length; i++)
            {
                var item = members[i];
                var j = i - 1;
                while (j >= 0 && Compare(members[j], item) > 0)
                {
                    members[j + 1] = members[j];
                    j--;
                    moves++;
                }

                members[j + 1] = item;
                if (moves > 4096)
                {
                    SortMany(members);
                    return;
                }
            }
        }

        private void SortMany(Span<int> members)
        {
            var names = new string[members.Length];
            var items = members.ToArray();
            for (var i = 0; i < items.Length; i++) names[i] = Name(items[i]);
            Array.Sort(names, items, StringComparer.Ordinal);
            items.CopyTo(members);
        }

        private void WriteString(int index)
        {
            ref var token = ref _tokens[index];
            if (token.Unpaired) throw Unpaired();
            if (token.Text is null)
            {
                Byte((byte)'"');
                Bytes(_input.AsSpan(token.Start, token.Length));
                Byte((byte)'"');
            }
            else
            {
                Bytes(Escaped.Quote(token.Text));
            }
        }

        private void Byte(byte value)
        {
            if (_written == _output.Length) Array.Resize(ref _output, 2 * _output.Length);
            _output[_written++] = value;
        }

        private void Bytes(ReadOnlySpan<byte> value)
        {
            if (_written + value.Length > _output.Length) Array.Resize(ref _output, Math.Max(_written + value.Length, 2 * _output.Length));
            value.CopyTo(_output.AsSpan(_written));
            _written += value.Length;
        }
    }

    /// <summary>
    /// A string as <see cref="Utf8JsonWriter"/> with relaxed escaping writes it, quotes included. Loaded only when a
    /// configuration holds an escape or non-ASCII text.
    /// </summary>
    private static class Escaped
    {
        [ThreadStatic] private static ArrayBufferWriter<byte>? t_buffer;
        [ThreadStatic] private static Utf8JsonWriter? t_writer;

        private static readonly JsonWriterOptions Options = new() { Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping, Indented = false };

        public static ReadOnlySpan<byte> Quote(string text)
        {
            var buffer = t_buffer ??= new ArrayBufferWriter<byte>(256);
            buffer.ResetWrittenCount();
            var writer = t_writer ??= new Utf8JsonWriter(buffer, Options);
            writer.Reset(buffer);
            try
            {
                writer.WriteStringValue(text);
            }
            catch (ArgumentException)
            {
                // Names and strings were checked when decoded; kept so that a surprise is still a one-line bad-input error.
                throw NotJson("a string cannot be written as UTF-8 text");
            }

            writer.Flush();
            return buffer.WrittenSpan;
        }
    }
}
