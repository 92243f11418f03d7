using System.Globalization;
using Accountant.Ledger;

namespace Accountant.Tests.Ledger;

/// <summary>Chain.ParseTimestamp reads its own shape directly; the BCL's ParseExact with the same format is the reference.</summary>
public sealed class TimestampTests
{
    private static DateTimeOffset Reference(string text) =>
        DateTimeOffset.ParseExact(text, "yyyy-MM-dd'T'HH:mm:ss.fffffff'Z'", CultureInfo.InvariantCulture, DateTimeStyles.AssumeUniversal);

    [Fact]
    public void Timestamps_read_as_parse_exact_reads_them()
    {
        var random = new Random(8);
        for (var i = 0; i < 20_000; i++)
        {
            var time = new DateTimeOffset(random.NextInt64(DateTimeOffset.MinValue.UtcTicks, DateTimeOffset.MaxValue.UtcTicks), TimeSpan.Zero);
            var text = Chain.Timestamp(time);
            var read = Chain.ParseTimestamp(text);
            Assert.Equal(Reference(text), read);
            Assert.Equal(Reference(text).Offset, read.Offset);
            Assert.Equal(time, read);
        }
    }

    [Theory]
    [InlineData("2026-02-29T00:00:00.0000000Z")]
    [InlineData("2026-13-01T00:00:00.0000000Z")]
    [InlineData("2026-00-01T00:00:00.0000000Z")]
    [InlineData("2026-01-32T00:00:00.0000000Z")]
    [InlineData("2026-01-01T24:00:00.0000000Z")]
    [InlineData("2026-01-01T00:60:00.0000000Z")]
    [InlineData("2026-01-01T00:00:60.0000000Z")]
    [InlineData("0000-01-01T00:00:00.0000000Z")]
    [InlineData("2026-01-01T00:00:00.000000Z")]
    [InlineData("2026-01-01T00:00:00.00000000Z")]
    [InlineData("2026-01-01 00:00:00.0000000Z")]
    [InlineData("2026-01-01T00:00:00.0000000")]
    [InlineData("2026-01-01T00:00:00.0000000+01")]
    [InlineData("2026-0a-01T00:00:00.0000000Z")]
    [InlineData("+026-01-01T00:00:00.0000000Z")]
    [InlineData("2026-01-01T00:00:00.000000٣Z")]
    [InlineData("")]
    [InlineData("2024-02-29T23:59:59.9999999Z")]
    public void Other_text_is_accepted_or_refused_as_parse_exact_does(string text)
    {
        var expected = Record.Exception(() => Reference(text));
        var actual = Record.Exception(() => Chain.ParseTimestamp(text));
        if (expected is null)
        {
            Assert.Null(actual);
            Assert.Equal(Reference(text), Chain.ParseTimestamp(text));
        }
        else
        {
            Assert.IsType(expected.GetType(), actual);
        }
    }
}
