using System.Globalization;
using System.Text;
using Accountant.Search.Data;
using Microsoft.ML;
using Microsoft.ML.Data;
using Microsoft.ML.Transforms;

namespace Accountant.Search.Tests;

/// <summary>
/// Feature hashing of categorical columns with more levels than the one-hot limit. The hash is checked against the
/// MurmurHash3_x86_32 verification values and against ML.NET's own hashing transform (a general-purpose library); the
/// search is checked on an invented dataset whose label depends on a 10,000-level column alone.
/// </summary>
public sealed class FeatureHashingTests() : TempFolder("accountant-hash-")
{
    [Theory]
    // MurmurHash3_x86_32 test values as commonly listed beside Appleby's SMHasher (from memory): byte strings and seeds.
    [InlineData("", 0u, 0x00000000u)]
    [InlineData("", 1u, 0x514E28B7u)]
    [InlineData("", 0xFFFFFFFFu, 0x81F16F39u)]
    [InlineData("FFFFFFFF", 0u, 0x76293B50u)]
    [InlineData("21436587", 0u, 0xF55B516Bu)]
    [InlineData("21436587", 0x5082EDEEu, 0x2362F9DEu)]
    [InlineData("214365", 0u, 0x7E4A8634u)]
    [InlineData("2143", 0u, 0xA0F7B07Au)]
    [InlineData("21", 0u, 0x72661CF4u)]
    [InlineData("00000000", 0u, 0x2362F9DEu)]
    public void The_hash_gives_the_published_values(string hex, uint seed, uint expected) =>
        Assert.Equal(expected, Murmur3.Hash(Convert.FromHexString(hex), seed));

    [Fact]
    public void The_hash_agrees_with_ML_NET_hashing_transform()
    {
        // ML.NET's HashingEstimator hashes ASCII text with MurmurHash3_x86_32 of its bytes and gives key (hash mod 2^bits) + 1
        // (0 is for empty text). Beyond ASCII it encodes characters to bytes its own way (its keys for "aé" and "café" differ
        // from the hash of their UTF-8), so only ASCII is compared here; the published values above cover bytes above 0x7F.
        var values = new[] { "a", "shop-1", "shop-9999", "The quick brown fox jumps over the lazy dog", "N/A?", "x y\tz" }.Concat(Enumerable.Range(0, 200).Select(i => $"level-{i}")).ToList();
        var ml = new MLContext(1);
        var view = ml.Data.LoadFromEnumerable(values.Select(v => new Text { Value = v }));
        foreach (var seed in new uint[] { 0, 314489979 })
        {
            var hashed = ml.Transforms.Conversion.Hash([new HashingEstimator.ColumnOptions("Key", nameof(Text.Value), numberOfBits: 31, seed: seed)]).Fit(view).Transform(view);
            var keys = hashed.GetColumn<uint>("Key").ToList();
            Assert.Equal(keys, values.Select(v => (Murmur3.Hash(v, seed) & 0x7FFFFFFFu) + 1));
        }
    }

    private sealed class Text
    {
        public string Value { get; set; } = "";
    }

    /// <summary>
    /// An invented dataset: 10,000 shops, each of which sells out on 90% of its days or on 10% (which one is fixed per shop
    /// by a coin), and a numeric column of noise. Only the shop tells anything.
    /// </summary>
    private string Shops(string name, int rows, int seed)
    {
        var random = new Random(seed);
        var text = new StringBuilder("day,shop,noise,sold_out\n");
        for (var i = 0; i < rows; i++)
        {
            var shop = random.Next(10_000);
            var good = Murmur3.Hash($"coin-{shop}", 7) % 2 == 0;
            var sold = random.NextDouble() < (good ? 0.9 : 0.1);
            text.Append(CultureInfo.InvariantCulture, $"{name}-{i},shop-{shop:D4},{random.NextDouble():F3},{(sold ? "yes" : "no")}\n");
        }

        var path = Path.Combine(Folder, name + ".csv");
        File.WriteAllText(path, text.ToString());
        return path;
    }

    [Fact]
    public void A_ten_thousand_level_column_is_hashed_the_model_uses_it_and_unseal_rebuilds_the_same_features()
    {
        var data = Shops("days", 30_000, 1);
        var test = Shops("sealed", 6_000, 2);
        var space = Path.Combine(Folder, "space.json");
        File.WriteAllText(space, """{"trainers":[{"trainer":"lbfgs-logistic","parameters":{"l2":{"scale":"choice","values":[0.5]},"l1":{"scale":"choice","values":[0.0001]}}}]}""");
        var ledger = Path.Combine(Folder, "ledger.db");
        var notes = new List<string>();
        using var book = Bookkeeper.Create(ledger);
        var search = new TabularSearch(book, ledger);
        var outcome = search.Run(new TabularSearchOptions { DataPath = data, TestPath = test, Label = "sold_out", IdColumn = "day", Looks = 1, SpacePath = space }, note: notes.Add);

        // Hashed, said on stderr and in the record: 12 bits, 4,096 slots and one for a missing value.
        var hashedNote = Assert.Single(notes, n => n.StartsWith("the column 'shop' has ", StringComparison.Ordinal));
        Assert.Contains("hashed into 4,096 slots (MurmurHash3, --hash-bits 12)", hashedNote);
        // The shops among the 24,000 training rows: draws of 10,000 equally likely shops, of which
        // 10,000·(1 − e^(−2.4)) = 9,093 are expected to appear (occupancy; SD about 25).
        var distinct = int.Parse(hashedNote["the column 'shop' has ".Length..].Split(' ')[0], NumberStyles.AllowThousands, CultureInfo.InvariantCulture);
        Assert.InRange(distinct, 8_950, 9_250);
        var record = SearchRecord.Read(outcome.RecordPath);
        Assert.Equal(["shop", "noise"], record.Featurizer.Columns);
        Assert.Equal([true, false], record.Featurizer.Hashed);
        Assert.Equal(12, record.Featurizer.HashBits);
        Assert.Equal(4097 + 1, record.Featurizer.Width);
        // No longer one slot for all but 50 levels: the 10,000 shops spread over the slots as 10,000 balls over 4,096 bins,
        // which fill 4,096·(1 − e^(−10,000/4,096)) = 3,739 of them on average (SD about 20).
        var slots = Enumerable.Range(0, 10_000).Select(s => Murmur3.Hash($"shop-{s:D4}", Featurizer.HashSeed) & 4095).Distinct().Count();
        Assert.InRange(slots, 3_600, 3_880);

        // The model uses the column: on the 6,000 sealed days it beats the constant prediction (the training majority,
        // about half wrong) by far more than 4 standard errors of a proportion (sqrt(0.25/6,000) = 0.0065).
        var (testError, rows, _) = search.ScoreTest(record);
        Assert.Equal(6_000, rows);
        var yes = File.ReadLines(test).Skip(1).Count(l => l.EndsWith(",yes", StringComparison.Ordinal)) / 6000.0;
        var constant = Math.Min(yes, 1 - yes);
        Assert.True(testError < constant - 4 * Math.Sqrt(0.25 / 6000), $"test error {testError:F4}, constant prediction {constant:F4}");

        // Unseal rebuilds the same features: the record's featurizer on rows read again scores the sealed days exactly as
        // the model held in memory does with the featurizer fitted during the search.
        Assert.Equal((testError, 6_000), outcome.Selected!.Score(RowSource.File(test)));
    }
}
