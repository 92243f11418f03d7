using Accountant.Ledger;
using Accountant.Statements;
using Accountant.Tests.Support;

namespace Accountant.Tests.Ledger;

/// <summary>Each backend's tally (counts and the best look computed in the database) against the definition, look by look.</summary>
public class TallyTests
{
    /// <summary>A store that keeps the interface's default tally, which reads every look.</summary>
    private sealed class DefaultTally(ILedgerStore inner) : ForwardingStore(inner);

    /// <summary>The store's tally of a holdout, checked equal to the default one (pattern included), with the ledger's voids.</summary>
    private static LookTally TallyEqualToDefinition(Bookkeeper book, string holdoutName)
    {
        var holdout = book.Holdout(holdoutName);
        var voided = book.Store.Voids(holdout).Select(v => v.LookNumber).ToHashSet();
        var fast = book.Store.Tally(holdout, voided);
        var reference = ((ILedgerStore)new DefaultTally(book.Store)).Tally(holdout, voided);
        Assert.Equal(reference with { Pattern = null }, fast with { Pattern = null });
        Assert.Equal(reference.Pattern, fast.Pattern);
        return fast;
    }

    [Theory]
    [InlineData(Metric.Error, Backend.Sqlite)]
    [InlineData(Metric.Accuracy, Backend.Sqlite)]
    [InlineData(Metric.Error, Backend.Postgres)]
    [InlineData(Metric.Accuracy, Backend.Postgres)]
    public void The_database_tally_equals_the_look_by_look_definition(Metric metric, Backend backend)
    {
        using var temp = new TempLedger(backend);
        var examples = TempLedger.Examples(50);
        using var book = temp.Create();
        book.RegisterHoldout("v", examples, metric);
        book.RegisterHoldout("other", examples, metric);
        // Ties on the best score (looks 2 and 4, both error 0.1 / accuracy 0.9), the earliest voided; score-only and adaptive looks.
        book.Record("v", """{"k":1}""", TempLedger.Predictions(examples, 15));
        book.Record("v", """{"k":2}""", TempLedger.Predictions(examples, 5));
        book.Record("v", """{"k":3}""", metric == Metric.Error ? 0.3 : 0.7, adaptive: true);
        book.Record("v", """{"k":4}""", TempLedger.Predictions(examples, 5), adaptive: true);
        book.Record("v", """{"k":5}""", TempLedger.Predictions(examples, 5));
        book.Record("other", """{"k":6}""", TempLedger.Predictions(examples, 0));
        book.Void("v", 2, "a mistake");

        var holdout = book.Holdout("v");
        var voided = book.Store.Voids(holdout).Select(v => v.LookNumber).ToHashSet();
        var fast = book.Store.Tally(holdout, voided);
        var reference = ((ILedgerStore)new DefaultTally(book.Store)).Tally(holdout, voided);
        Assert.Equal(reference with { Pattern = null }, fast with { Pattern = null });
        Assert.Equal(new LookTally(5, 2, 1, reference.Best), fast with { Pattern = null });
        // With adaptive looks the tally carries every look's flag and guard, in order.
        Assert.Equal(reference.Pattern!, fast.Pattern!);
        Assert.Equal([false, false, true, true, false], fast.Pattern!.Select(p => p.Adaptive));
        Assert.Equal(4, fast.Best!.Number);
        Assert.Equal("""{"k":4}""", fast.Best.Configuration);

        // The statement built from the tally is the statement built from every look.
        var fromLooks = StatementBuilder.Build(holdout, book.Store.Looks(holdout), book.Store.Voids(holdout), book.Store.ChainHead());
        var fromTally = book.Statement("v");
        Assert.Equal(fromLooks.Looks, fromTally.Looks);
        Assert.Equal(fromLooks.Best, fromTally.Best);
        Assert.Equal(fromLooks.Bounds, fromTally.Bounds);
        Assert.Equal(fromLooks.Warnings, fromTally.Warnings);
    }

    [Theory]
    [InlineData(Metric.Error, Backend.Sqlite)]
    [InlineData(Metric.Accuracy, Backend.Sqlite)]
    [InlineData(Metric.Error, Backend.Postgres)]
    public void With_the_best_scores_voided_the_tally_still_equals_the_definition(Metric metric, Backend backend)
    {
        // Scores from a small set (many ties), the looks holding the best score and some of the next best voided, so the
        // best is found behind voided looks; the reference is the default tally, which reads every look.
        using var temp = new TempLedger(backend);
        var examples = TempLedger.Examples(20);
        using var book = temp.Create();
        book.RegisterHoldout("v", examples, metric);
        book.RegisterHoldout("empty", examples, metric);
        var random = new Random(12);
        var scores = Enumerable.Range(0, 60).Select(_ => random.Next(1, 8) / 10.0).ToArray();
        for (var i = 0; i < scores.Length; i++) book.Record("v", $$"""{"k":{{i}}}""", scores[i], adaptive: i % 7 == 0);
        var better = metric == Metric.Error ? scores.Min() : scores.Max();
        var second = metric == Metric.Error ? scores.Where(x => x > better).Min() : scores.Where(x => x < better).Max();
        for (var i = 0; i < scores.Length; i++)
        {
            if (scores[i] == better || (scores[i] == second && i % 2 == 0)) book.Void("v", i + 1, "a mistake");
        }

        TallyEqualToDefinition(book, "empty");
        // The best is the earliest look with the second-best score that is not voided: an odd index.
        var best = TallyEqualToDefinition(book, "v").Best!;
        Assert.Equal(second, best.Score);
        Assert.Equal(Enumerable.Range(0, scores.Length).First(i => scores[i] == second && i % 2 == 1) + 1, best.Number);
    }

    [Theory]
    [InlineData(Metric.Error, Backend.Sqlite)]
    [InlineData(Metric.Accuracy, Backend.Sqlite)]
    [InlineData(Metric.Auc, Backend.Sqlite)]
    [InlineData(Metric.Error, Backend.Postgres)]
    [InlineData(Metric.Accuracy, Backend.Postgres)]
    [InlineData(Metric.Auc, Backend.Postgres)]
    public void Past_many_voided_ties_and_with_every_look_voided_the_tally_equals_the_definition(Metric metric, Backend backend)
    {
        // The tally walks the score index from the better end in pages (rows 0–15, 16–79, 80–335, ...) past voided looks,
        // then walks the looks tied on the best score by number. "ties-16" and "ties-80": 97 looks share the best score and
        // all of them are voided but one, the 17th (or 81st) by number, which is then the 81st (or 17th) from the other end:
        // the one look a walk must find sits on a page boundary from either end. Looks that are not the best are voided
        // too, some twice. "all": every look voided. "others": only looks that are not the best are voided.
        using var temp = new TempLedger(backend);
        var examples = TempLedger.Examples(20);
        using var book = temp.Create();
        var random = new Random(2024);
        var better = metric.HigherIsBetter() ? 0.9 : 0.1;
        // Scores on the holdout's grid of k/20; the best value is never drawn by the random part.
        double Other() => (metric.HigherIsBetter() ? random.Next(4, 18) : random.Next(3, 17)) / 20.0;
        var scores = new Dictionary<string, double[]>
        {
            ["ties-16"] = Enumerable.Range(0, 194).Select(i => i % 2 == 0 ? better : Other()).ToArray(),
            ["ties-80"] = Enumerable.Range(0, 194).Select(i => i % 2 == 1 ? better : Other()).ToArray(),
            ["all"] = Enumerable.Range(0, 40).Select(i => i % 4 == 0 ? better : Other()).ToArray(),
            ["others"] = Enumerable.Range(0, 120).Select(i => i % 10 == 7 ? better : Other()).ToArray(),
        };
        var kept = new Dictionary<string, int>();
        var voids = new Dictionary<string, List<int>>();
        foreach (var (name, values) in scores)
        {
            book.RegisterHoldout(name, examples, metric);
            book.RecordMany(name, values.Select((score, i) => new LookInput { Configuration = $$"""{"k":{{i}}}""", Score = score, Adaptive = i % 9 == 0 }).ToList());
            var tied = Enumerable.Range(1, values.Length).Where(n => values[n - 1] == better).ToList();
            var notBest = Enumerable.Range(1, values.Length).Where(n => values[n - 1] != better).ToList();
            if (name.StartsWith("ties-", StringComparison.Ordinal))
            {
                Assert.Equal(97, tied.Count);
                kept[name] = tied[int.Parse(name[5..], System.Globalization.CultureInfo.InvariantCulture)];
            }

            voids[name] = name switch
            {
                "all" => [.. Enumerable.Range(1, values.Length), 1, 2],
                "others" => [.. notBest.Where(n => n % 3 == 0), .. notBest.Where(n => n % 6 == 0)],
                _ => [.. tied.Where(n => n != kept[name]), .. notBest.Where(n => n % 5 == 0), .. notBest.Where(n => n % 25 == 0)],
            };
            foreach (var number in voids[name]) book.Void(name, number, "a mistake");
        }

        foreach (var (name, values) in scores)
        {
            var fast = TallyEqualToDefinition(book, name);

            // The definition written out here as well: the lowest score (highest when higher is better) among the looks
            // not voided, the earliest look on ties.
            var candidates = Enumerable.Range(1, values.Length).Where(n => !voids[name].Contains(n)).ToList();
            int? expected = candidates.Count == 0 ? null
                : candidates.OrderBy(n => metric.HigherIsBetter() ? -values[n - 1] : values[n - 1]).ThenBy(n => n).First();
            Assert.Equal(expected, fast.Best?.Number);
            Assert.Equal(values.Length, fast.Looks);
            Assert.Equal(values.Length, fast.ScoreOnly);
            Assert.Equal(Enumerable.Range(0, values.Length).Count(i => i % 9 == 0), fast.Adaptive);
            if (fast.Best is { } best) Assert.Equal($$"""{"k":{{best.Number - 1}}}""", best.Configuration);
        }

        // The statement selects the one tied look left, none when all are voided, and the first best look otherwise.
        Assert.Equal(kept["ties-16"], book.Statement("ties-16").Best!.Number);
        Assert.Equal(kept["ties-80"], book.Statement("ties-80").Best!.Number);
        Assert.Null(book.Statement("all").Best);
        Assert.Equal(8, book.Statement("others").Best!.Number);
    }

    [Theory]
    [InlineData(Backend.Sqlite)]
    [InlineData(Backend.Postgres)]
    public void A_holdout_whose_looks_are_all_voided_has_no_best(Backend backend)
    {
        using var temp = new TempLedger(backend);
        var examples = TempLedger.Examples(10);
        using var book = temp.Create();
        book.RegisterHoldout("v", examples);
        book.Record("v", "{}", 0.5);
        book.Void("v", 1, "wrong data");
        var tally = book.Store.Tally(book.Holdout("v"), new HashSet<int> { 1 });
        Assert.Equal(1, tally.Looks);
        Assert.Null(tally.Best);
    }
}
