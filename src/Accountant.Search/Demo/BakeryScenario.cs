using Microsoft.ML;

namespace Accountant.Search.Demo;

/// <summary>One day's batch at an invented neighbourhood bakery: did the sourdough sell out by closing?</summary>
public sealed class BakeryDay
{
    public string Id { get; set; } = "";

    /// <summary>Mon … Sun.</summary>
    public string Weekday { get; set; } = "";

    /// <summary>Midday temperature, °C.</summary>
    public float Temperature { get; set; }

    /// <summary>Rainfall during opening hours, mm.</summary>
    public float Rain { get; set; }

    /// <summary>1 when there was a market or festival on the street.</summary>
    public float StreetEvent { get; set; }

    /// <summary>Loaves baked that morning.</summary>
    public float Loaves { get; set; }

    /// <summary>Price of a loaf, in the bakery's currency.</summary>
    public float Price { get; set; }

    /// <summary>Hours the shop was open.</summary>
    public float HoursOpen { get; set; }

    /// <summary>Did the batch sell out? (the label)</summary>
    public bool Label { get; set; }

    /// <summary>The true probability of selling out under the scenario's rule (not a feature).</summary>
    public float TrueProbability { get; set; }
}

/// <summary>
/// An invented scenario with a known rule, made by code for the demo and the examples: the probability that a
/// bakery's batch sells out is a logistic function of the day's conditions, with an interaction (rain hurts less
/// on event days) and a threshold effect (batches over 140 loaves rarely sell out), and the outcome is a coin flip
/// with that probability. The Bayes error is therefore known, and any model's true error can be measured on a large
/// fresh sample. Nothing here describes a real bakery.
/// </summary>
public static class BakeryScenario
{
    public static readonly string[] Weekdays = ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"];

    private static readonly double[] WeekdayEffect = [-0.6, -0.5, -0.3, -0.1, 0.4, 1.1, 0.7];

    /// <summary>The scenario's rule: P(sold out | conditions).</summary>
    public static double SellOutProbability(int weekday, double temperature, double rain, bool streetEvent, double loaves, double price, double hoursOpen)
    {
        var logit = 0.8
            + WeekdayEffect[weekday]
            - 0.004 * (temperature - 18) * (temperature - 18)
            - (streetEvent ? 0.08 : 0.25) * Math.Sqrt(rain)
            + (streetEvent ? 1.3 : 0.0)
            - 0.018 * (loaves - 100)
            - (loaves > 140 ? 1.0 : 0.0)
            - 0.9 * (price - 4.5)
            + 0.25 * (hoursOpen - 9);
        // The factor sets how much of the outcome the conditions explain (Bayes error about 0.17).
        return 1.0 / (1.0 + Math.Exp(-1.8 * logit));
    }

    /// <summary>Draws <paramref name="count"/> days; ids are "{prefix}{index}".</summary>
    public static List<BakeryDay> Generate(int count, int seed, string prefix = "day-")
    {
        var random = new Random(seed);
        var days = new List<BakeryDay>(count);
        for (var i = 0; i < count; i++)
        {
            var weekday = random.Next(7);
            var temperature = Math.Round(4 + 26 * random.NextDouble(), 1);
            var rain = random.NextDouble() < 0.6 ? 0.0 : Math.Round(-6 * Math.Log(1 - random.NextDouble()), 1);
            var streetEvent = random.NextDouble() < 0.15;
            var loaves = Math.Round(60 + 100 * random.NextDouble());
            var price = Math.Round(3.5 + 2.0 * random.NextDouble(), 2);
            var hours = 7 + random.Next(6);
            // The rule is applied to the recorded (rounded) values, so the features carry all there is to know.
            var p = SellOutProbability(weekday, temperature, rain, streetEvent, loaves, price, hours);
            days.Add(new BakeryDay
            {
                Id = prefix + i.ToString(System.Globalization.CultureInfo.InvariantCulture),
                Weekday = Weekdays[weekday],
                Temperature = (float)temperature,
                Rain = (float)rain,
                StreetEvent = streetEvent ? 1f : 0f,
                Loaves = (float)loaves,
                Price = (float)price,
                HoursOpen = hours,
                Label = random.NextDouble() < p,
                TrueProbability = (float)p,
            });
        }

        return days;
    }

    /// <summary>The columns of the scenario's days as a table (the label column is <c>sold_out</c>, yes or no).</summary>
    public static readonly string[] Header = ["day", "weekday", "temperature", "rain", "street_event", "loaves", "price", "hours_open", "sold_out"];

    /// <summary>One day's fields, in the order of <see cref="Header"/>, as a CSV file holds them (culture-invariant).</summary>
    public static string[] Cells(BakeryDay d)
    {
        static string N(float x) => x.ToString(System.Globalization.CultureInfo.InvariantCulture);
        return [d.Id, d.Weekday, N(d.Temperature), N(d.Rain), N(d.StreetEvent), N(d.Loaves), N(d.Price), N(d.HoursOpen), d.Label ? "yes" : "no"];
    }

    /// <summary>Days as rows for a search, held in memory.</summary>
    public static Data.RowSource Rows(string name, IEnumerable<BakeryDay> days) => Data.RowSource.Memory(name, Header, days.Select(Cells));

    /// <summary>Writes days as CSV with a header (the label column is <c>sold_out</c>, yes or no).</summary>
    public static void WriteCsv(IEnumerable<BakeryDay> days, TextWriter writer)
    {
        writer.WriteLine(string.Join(',', Header));
        foreach (var d in days)
        {
            writer.WriteLine(string.Join(',', Cells(d)));
        }
    }

    /// <summary>
    /// An ML.NET featurizer for the scenario's days as <see cref="BakeryDay"/> objects, for a training loop of one's own in an
    /// <see cref="Microsoft.ML.MLContext"/>: the weekday one-hot, the other conditions as they are.
    /// </summary>
    public static Microsoft.ML.IEstimator<Microsoft.ML.ITransformer> Featurizer(Microsoft.ML.MLContext ml) =>
        ml.Transforms.Categorical.OneHotEncoding("WeekdayOneHot", nameof(BakeryDay.Weekday))
            .Append(ml.Transforms.Concatenate("Features", "WeekdayOneHot", nameof(BakeryDay.Temperature), nameof(BakeryDay.Rain),
                nameof(BakeryDay.StreetEvent), nameof(BakeryDay.Loaves), nameof(BakeryDay.Price), nameof(BakeryDay.HoursOpen)));

    /// <summary>The Bayes error of a sample: the mean of min(p, 1 − p), the error of the best possible classifier.</summary>
    public static double BayesError(IEnumerable<BakeryDay> days) => days.Average(d => Math.Min(d.TrueProbability, 1 - d.TrueProbability));
}
