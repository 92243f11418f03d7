using System.Globalization;
using System.Text;
using Accountant.Ledger;
using Accountant.Tests.Ledger.Reference;

namespace Accountant.Tests.Ledger;

/// <summary>
/// The reader-based canonicalizer and the direct look-entry writer against the implementations they replaced
/// (<see cref="ReferenceConfigurationJson"/>, <see cref="ReferenceChain"/>: JsonDocument and Utf8JsonWriter, kept
/// unchanged in Reference/). Every ledger made so far hashes the reference's bytes, so any difference is a break.
/// </summary>
public sealed class CanonicalFormTests
{
    // Characters chosen to reach every escaping rule of the relaxed encoder: ASCII punctuation, the quote and backslash,
    // C0 controls, DEL, Latin-1 and C1 controls, U+2028/U+2029, CJK, private use (U+E000, which sorts after a surrogate
    // pair in UTF-16 but before it in UTF-8), noncharacters U+FFFE/U+FFFF, an unassigned code point and emoji (pairs).
    private static readonly string[] Pieces =
    [
        "a", "b", "z", "A", "Z", "0", "9", "_", "-", " ", "~", "<", ">", "&", "'", "+", "`", "/", "=", "\"", "\\",
        "\n", "\t", "\r", "\b", "\f", "\u0000", "\u0001", "\u001f", "\u007f", "é", "ß", "\u0085", "\u00a0", "\u00ad",
        "\u2028", "\u2029", "中文", "\ue000", "\uffff", "\ufffe", "\ufeff", "\u0378", "😀", "𝄞", "\U0001F600\U0001F601",
    ];

    private static readonly string[] Numbers =
    [
        "0", "-0", "1", "-1", "1.0", "0.0", "-0.0", "1e-7", "1E-7", "1e+7", "1E7", "2.5e-10", "123456789012345678901234567890",
        "-98765432109876543210.5", "0.1", "3.141592653589793238462643383279", "1e308", "1e-400", "5e-324", "31", "0.01",
    ];

    [Fact]
    public void Canonical_forms_equal_the_reference_over_generated_configurations()
    {
        var random = new Random(20260501);
        var (same, errors) = (0, 0);
        for (var i = 0; i < 6000; i++)
        {
            var json = Render(random, Value(random, depth: 0, forceObject: true), random.Next(3));
            if (Compare(json)) same++; else errors++;
        }

        // Both outcomes are exercised: most inputs canonicalize, some repeat a key.
        Assert.True(same > 4000, $"{same} canonicalized");
        Assert.True(errors > 100, $"{errors} refused");
    }

    private const string Damage = "{}[],:\"\\x1 .e-\u00e9";

    [Fact]
    public void Damaged_configurations_give_the_reference_error()
    {
        var random = new Random(7);
        var refused = 0;
        for (var i = 0; i < 3000; i++)
        {
            var json = Render(random, Value(random, 0, forceObject: true), random.Next(3));
            var damaged = (i % 3) switch
            {
                0 => json[..random.Next(json.Length)],
                1 => json.Remove(random.Next(json.Length), 1),
                _ => json.Insert(random.Next(json.Length + 1), Damage[random.Next(Damage.Length)].ToString()),
            };
            if (!Compare(damaged)) refused++;
        }

        Assert.True(refused > 2000, $"{refused} refused");
    }

    [Theory]
    [InlineData("")]
    [InlineData(" ")]
    [InlineData("{")]
    [InlineData("}")]
    [InlineData("[]")]
    [InlineData("[{\"a\":1}]")]
    [InlineData("1")]
    [InlineData("\"text\"")]
    [InlineData("null")]
    [InlineData("true")]
    [InlineData("{\"a\":}")]
    [InlineData("{\"a\" 1}")]
    [InlineData("{'a':1}")]
    [InlineData("{a:1}")]
    [InlineData("{\"a\":1,}")]
    [InlineData("{\"a\":[1,]}")]
    [InlineData("{\"a\":01}")]
    [InlineData("{\"a\":1.}")]
    [InlineData("{\"a\":.5}")]
    [InlineData("{\"a\":+1}")]
    [InlineData("{\"a\":NaN}")]
    [InlineData("{\"a\":Infinity}")]
    [InlineData("{\"a\":tru}")]
    [InlineData("{\"a\":1}x")]
    [InlineData("{\"a\":1}{}")]
    [InlineData("/*c*/{}")]
    [InlineData("{\"a\":1}//c")]
    [InlineData("{\"a\":\"\t\"}")]
    [InlineData("{\"a\":\"\\x\"}")]
    [InlineData("{\"a\":\"\\u12\"}")]
    [InlineData("\ufeff{\"a\":1}")]
    [InlineData("{\"a\":1,\"a\":1}")]
    [InlineData("{\"b\":{\"c\":1,\"c\":2},\"a\":{\"d\":1,\"d\":2}}")]
    [InlineData("{\"x\":[{\"y\":1,\"y\":2}],\"x\":3}")]
    [InlineData("{\"\\u0061\":1,\"a\":2}")]
    [InlineData("{}")]
    [InlineData("  {  }  ")]
    [InlineData("{\"\":\"\"}")]
    [InlineData("{\"a\":\"\\/\\b\\f\\n\\r\\t\\\"\\\\\\u00e9\\uD83D\\uDE00\"}")]
    public void Chosen_inputs_match_the_reference(string json) => Compare(json);

    [Fact]
    public void Nesting_is_limited_to_64_levels_as_before()
    {
        static string Nested(int levels) => string.Concat(Enumerable.Repeat("{\"a\":", levels - 1)) + "{}" + new string('}', levels - 1);
        Assert.True(Compare(Nested(64)));
        Assert.False(Compare(Nested(65)));
        Assert.False(Compare("{\"a\":" + new string('[', 64) + new string(']', 64) + "}"));
    }

    [Fact]
    public void Objects_with_many_members_in_any_order_match_the_reference()
    {
        var random = new Random(3);
        foreach (var count in new[] { 2, 50, 300, 2000 })
        {
            var keys = Enumerable.Range(0, count).Select(i => $"k{i:x}{Pieces[i % Pieces.Length]}").OrderBy(_ => random.Next()).ToList();
            Assert.True(Compare("{" + string.Join(",", keys.Select((k, i) => $"{Quote(k, random, 0)}:{i}")) + "}"));
            keys.Sort(StringComparer.Ordinal);
            Assert.True(Compare("{" + string.Join(",", keys.Select((k, i) => $"{Quote(k, random, 0)}:{i}")) + "}"));
        }
    }

    [Fact]
    public void Canonical_input_comes_back_as_the_same_string()
    {
        var random = new Random(11);
        for (var i = 0; i < 500; i++)
        {
            string canonical;
            try
            {
                canonical = ReferenceConfigurationJson.Canonicalize(Render(random, Value(random, 0, forceObject: true), 0));
            }
            catch (AccountantException)
            {
                continue;
            }

            Assert.Same(canonical, ConfigurationJson.Canonicalize(canonical));
        }
    }

    [Fact]
    public void Halves_of_surrogate_pairs_are_a_bad_input_error()
    {
        // The reference let these escape as ArgumentException or InvalidOperationException (not a one-line error);
        // now they are refused like any other invalid configuration, and nothing is written.
        foreach (var json in new[] { "{\"a\":\"\ud800\"}", "{\"\udc00\":1}", "{\"a\":\"\\ud800\"}", "{\"\\udfff\":1}", "{\"a\":[\"x\",\"\\ud83d\"]}" })
        {
            var reference = Record.Exception(() => ReferenceConfigurationJson.Canonicalize(json));
            Assert.True(reference is ArgumentException or InvalidOperationException, reference?.GetType().Name);
            var e = Assert.Throws<AccountantException>(() => ConfigurationJson.Canonicalize(json));
            Assert.Equal(ErrorKind.BadInput, e.Kind);
            Assert.StartsWith("the configuration is not valid JSON (", e.Message, StringComparison.Ordinal);
            Assert.DoesNotContain('\n', e.Message);
        }

        // A syntax error and a repeated key earlier in the writing order still come first, as they did.
        Assert.False(Compare("{\"a\":\"\\ud800\",}"));
        Assert.False(Compare("{\"b\":\"\\ud800\",\"a\":{\"c\":1,\"c\":1}}"));
        Assert.False(Compare("[\"\\ud800\"]"));
    }

    [Fact]
    public void Digest_is_sha256_of_the_utf8_text()
    {
        // FIPS 180-2, Appendix B.1: SHA-256("abc").
        Assert.Equal("ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad", ConfigurationJson.Digest("abc"));
        var random = new Random(5);
        foreach (var length in new[] { 0, 1, 100, 400, 1023, 5000 })
        {
            var text = string.Concat(Enumerable.Range(0, length).Select(_ => Pieces[random.Next(Pieces.Length)]));
            Assert.Equal(ReferenceConfigurationJson.Digest(text), ConfigurationJson.Digest(text));
        }
    }

    [Fact]
    public void Look_entries_equal_the_reference_bytes()
    {
        var random = new Random(99);
        double[] doubles = [0, -0.0, 0.1, 1.0 / 3, 1e-7, 5e-324, double.MaxValue, -1.5, 12345.678, double.Epsilon, 0.2021, 1e21, 123456789012];
        long[] sequences = [1, 2, 99, int.MaxValue, long.MaxValue, -1];
        var direct = 0;
        for (var i = 0; i < 4000; i++)
        {
            string configuration;
            try
            {
                configuration = ConfigurationJson.Canonicalize(Render(random, Value(random, 0, forceObject: true, ascii: i % 2 == 0), random.Next(3)));
            }
            catch (AccountantException)
            {
                continue;
            }

            string? Label() => random.Next(3) == 0 ? null : i % 2 == 0 ? $"s{random.Next(1000)}\"\\" : Text(random, 1 + random.Next(6));
            double? Maybe() => random.Next(3) == 0 ? null : doubles[random.Next(doubles.Length)];
            var sequence = sequences[random.Next(sequences.Length)];
            var fingerprint = Convert.ToHexStringLower(Guid.NewGuid().ToByteArray()) + "00ff";
            var number = random.Next(3) == 0 ? int.MaxValue : random.Next(1, 100_000);
            var digest = ConfigurationJson.Digest(configuration);
            var score = doubles[random.Next(doubles.Length)];
            var adaptive = random.Next(2) == 0;
            var encoding = (LossEncoding)random.Next(4);
            var losses = random.Next(2) == 0 ? null : RandomBytes(random, random.Next(0, 300));
            var (search, stage, seconds) = (Label(), Label(), Maybe());
            var recorded = Chain.Timestamp(new DateTimeOffset(2020, 1, 1, 0, 0, 0, TimeSpan.Zero).AddTicks(random.NextInt64(0, TimeSpan.TicksPerDay * 3000)));
            var release = random.Next(2) == 0 ? null : new Released(Label() ?? "ladder:0.01", Maybe(), random.Next(2) == 0, Maybe());

            var expected = ReferenceChain.LookEntry(sequence, fingerprint, number, configuration, digest, score, adaptive, encoding, losses, search, stage, seconds, recorded, release);
            var actual = Chain.LookEntry(sequence, fingerprint, number, configuration, digest, score, adaptive, encoding, losses, search, stage, seconds, recorded, release);
            Assert.Equal(Encoding.UTF8.GetString(expected), Encoding.UTF8.GetString(actual));
            Assert.Equal(expected, actual);
            if (LookEntryWriter.TryWrite(sequence, fingerprint, number, configuration, digest, score, adaptive, encoding, losses, search, stage, seconds, recorded, release) is not null) direct++;
        }

        // Both ways of writing are exercised: ASCII-only entries directly, the rest through the JSON writer.
        Assert.InRange(direct, 1000, 3000);
    }

    [Fact]
    public void A_look_on_a_declared_stream_appends_its_stream_fields_the_same_way_in_both_writers()
    {
        // Schema 4 adds "stream", "streamIndex" and "streamAnswers" after the release's fields, only when a stream is named,
        // so entries of earlier schemas keep their bytes (the test above). The direct writer must write the same bytes as the
        // JSON writer, which gives up on the direct path for text it cannot copy (the é below).
        var release = new Released("thresholdout:0.02,0.01,40", 0.301, true, 0.25) { Stream = "tuning \"a\"", Index = 17, Answers = 3 };
        var bytes = Chain.WriteLookEntry(9, "ab", 4, "{}", "d", 0.3, true, LossEncoding.None, null, null, null, null, "t", release);
        Assert.Equal("""{"v":1,"kind":"look","seq":9,"holdout":"ab","number":4,"configuration":"{}","configurationDigest":"d","score":"0.3","adaptive":true,"lossEncoding":0,"losses":null,"search":null,"stage":null,"seconds":null,"recordedAt":"t","guard":"thresholdout:0.02,0.01,40","released":"0.301","holdoutAnswered":true,"trainScore":"0.25","stream":"tuning \"a\"","streamIndex":17,"streamAnswers":3}""",
            Encoding.UTF8.GetString(bytes));
        Assert.Equal(bytes, LookEntryWriter.TryWrite(9, "ab", 4, "{}", "d", 0.3, true, LossEncoding.None, null, null, null, null, "t", release));
        Assert.Equal(bytes, Chain.LookEntry(9, "ab", 4, "{}", "d", 0.3, true, LossEncoding.None, null, null, null, null, "t", release));
        var unicode = release with { Stream = "réglage" };
        Assert.Null(LookEntryWriter.TryWrite(9, "ab", 4, "{}", "d", 0.3, true, LossEncoding.None, null, null, null, null, "t", unicode));
        Assert.Contains("\"stream\":\"réglage\"", Encoding.UTF8.GetString(Chain.LookEntry(9, "ab", 4, "{}", "d", 0.3, true, LossEncoding.None, null, null, null, null, "t", unicode)));
        // The declaration entry.
        Assert.Equal("""{"v":1,"kind":"stream","seq":2,"holdout":"ab","name":"noisy","guard":"thresholdout:0.02,0.01,40","seed":"18446744073709551615","createdAt":"t"}""",
            Encoding.UTF8.GetString(Chain.StreamEntry(2, "ab", "noisy", "thresholdout:0.02,0.01,40", ulong.MaxValue, "t")));
    }

    [Fact]
    public void Every_ascii_and_chosen_character_is_escaped_as_the_reference_does()
    {
        for (var c = 0; c < 0x3000; c++)
        {
            if (char.IsSurrogate((char)c)) continue;
            var text = "x" + (char)c + "y";
            var expected = ReferenceChain.LookEntry(1, "f", 1, text, "d", 0.5, false, LossEncoding.None, null, text, null, null, "t");
            Assert.Equal(expected, Chain.LookEntry(1, "f", 1, text, "d", 0.5, false, LossEncoding.None, null, text, null, null, "t"));
        }
    }

    /// <summary>Runs both; true when both canonicalize (to the same text), false when both refuse (with the same error).</summary>
    private static bool Compare(string json)
    {
        string? expected = null, actual = null;
        var expectedError = Record.Exception(() => expected = ReferenceConfigurationJson.Canonicalize(json));
        var actualError = Record.Exception(() => actual = ConfigurationJson.Canonicalize(json));
        if (expectedError is null)
        {
            Assert.Null(actualError);
            Assert.Equal(expected, actual);
            return true;
        }

        var mine = Assert.IsType<AccountantException>(actualError);
        if (expectedError is ArgumentException or InvalidOperationException)
        {
            // A half of a surrogate pair, which the reference did not turn into a one-line error (see the test above).
            Assert.Equal(ErrorKind.BadInput, mine.Kind);
            Assert.Contains("surrogate", mine.Message, StringComparison.Ordinal);
            return false;
        }

        var reference = Assert.IsType<AccountantException>(expectedError);
        Assert.Equal(reference.Kind, mine.Kind);
        Assert.Equal(reference.Message, mine.Message);
        return false;
    }

    private static byte[] RandomBytes(Random random, int length)
    {
        var bytes = new byte[length];
        random.NextBytes(bytes);
        return bytes;
    }

    private static string Text(Random random, int pieces, bool ascii = false)
    {
        var builder = new StringBuilder();
        for (var i = 0; i < pieces; i++) builder.Append(Pieces[random.Next(ascii ? 21 : Pieces.Length)]);
        return builder.ToString();
    }

    // A generated JSON value: a tree rendered later with chosen whitespace, escapes and member order.
    private abstract record Node;
    private sealed record Scalar(string Json) : Node;
    private sealed record Str(string Text) : Node;
    private sealed record Arr(List<Node> Items) : Node;
    private sealed record Obj(List<(string Key, Node Value)> Members) : Node;

    private static Node Value(Random random, int depth, bool forceObject = false, bool ascii = false)
    {
        var kind = forceObject ? 0 : random.Next(depth > 4 ? 2 : 4) + 2;
        switch (kind)
        {
            case 0 or 4:
                var members = new List<(string, Node)>();
                var count = random.Next(depth == 0 ? 8 : 5);
                for (var i = 0; i < count; i++) members.Add((Text(random, 1 + random.Next(4), ascii), Value(random, depth + 1, ascii: ascii)));
                // Sometimes a key twice, at any depth.
                if (count > 0 && random.Next(12) == 0) members.Add((members[random.Next(count)].Item1, new Scalar("1")));
                return new Obj(members);
            case 5:
                return new Arr(Enumerable.Range(0, random.Next(4)).Select(_ => Value(random, depth + 1, ascii: ascii)).ToList());
            default:
                return random.Next(5) switch
                {
                    0 => new Scalar(Numbers[random.Next(Numbers.Length)]),
                    1 => new Scalar(random.Next(3) switch { 0 => "true", 1 => "false", _ => "null" }),
                    2 => new Scalar(random.Next(-1000, 1000).ToString(CultureInfo.InvariantCulture)),
                    _ => new Str(Text(random, random.Next(6), ascii)),
                };
        }
    }

    private static string Render(Random random, Node node, int style)
    {
        var builder = new StringBuilder();
        Render(random, node, style, builder);
        return builder.ToString();
    }

    /// <summary>Style 0: compact, members as generated (often sorted by chance only); 1: random whitespace; 2: sorted keys, compact.</summary>
    private static void Render(Random random, Node node, int style, StringBuilder builder)
    {
        string Space() => style == 1 ? new[] { "", " ", "\n", "\t", "\r\n  " }[random.Next(5)] : "";
        switch (node)
        {
            case Scalar s:
                builder.Append(s.Json);
                break;
            case Str s:
                builder.Append(Quote(s.Text, random, style));
                break;
            case Arr a:
                builder.Append('[').Append(Space());
                for (var i = 0; i < a.Items.Count; i++)
                {
                    if (i > 0) builder.Append(',').Append(Space());
                    Render(random, a.Items[i], style, builder);
                    builder.Append(Space());
                }

                builder.Append(']');
                break;
            case Obj o:
                var members = style == 2 ? o.Members.OrderBy(m => m.Key, StringComparer.Ordinal).ToList() : o.Members;
                builder.Append('{').Append(Space());
                for (var i = 0; i < members.Count; i++)
                {
                    if (i > 0) builder.Append(',').Append(Space());
                    builder.Append(Quote(members[i].Key, random, style)).Append(Space()).Append(':').Append(Space());
                    Render(random, members[i].Value, style, builder);
                    builder.Append(Space());
                }

                builder.Append('}');
                break;
        }
    }

    /// <summary>A JSON string literal: characters JSON requires escaped are escaped in one of their forms; others sometimes.</summary>
    private static string Quote(string text, Random random, int style)
    {
        var builder = new StringBuilder("\"");
        for (var i = 0; i < text.Length; i++)
        {
            var c = text[i];
            var must = c is '"' or '\\' || c < 0x20;
            var escape = must || (style != 2 && random.Next(6) == 0);
            if (char.IsHighSurrogate(c) && i + 1 < text.Length)
            {
                // A pair is escaped as a whole or not at all.
                builder.Append(escape ? $"\\u{(int)c:X4}\\u{(int)text[i + 1]:x4}" : text.Substring(i, 2));
                i++;
                continue;
            }

            if (!escape)
            {
                builder.Append(c);
                continue;
            }

            var form = random.Next(3);
            var shortForm = c switch { '"' => "\\\"", '\\' => "\\\\", '\n' => "\\n", '\t' => "\\t", '\r' => "\\r", '\b' => "\\b", '\f' => "\\f", '/' => "\\/", _ => null };
            if (shortForm is not null && form != 0) builder.Append(shortForm);
            else builder.Append(form == 2 ? $"\\u{(int)c:x4}" : $"\\u{(int)c:X4}");
        }

        return builder.Append('"').ToString();
    }
}
