using System.Text;

namespace Accountant.Search.Tests;

/// <summary>
/// Searches on an open dataset: MAGIC Gamma Telescope, Bock, R. (2004), UCI Machine Learning Repository,
/// https://doi.org/10.24432/C52C8B, licensed CC BY 4.0 (shared/data/magic04; Monte Carlo generated gamma and hadron
/// events, 19,020 rows, 10 features, class g or h). The file has no header; the column names are those of its
/// magic04.names description.
/// </summary>
public sealed class OpenDataTests : IDisposable
{
    private const string Header = "fLength,fWidth,fSize,fConc,fConc1,fAsym,fM3Long,fM3Trans,fAlpha,fDist,class";
    private readonly string _folder = Path.Combine(Path.GetTempPath(), "accountant-magic-" + Guid.NewGuid().ToString("N"));

    public OpenDataTests() => Directory.CreateDirectory(_folder);

    public void Dispose()
    {
        try { Directory.Delete(_folder, true); } catch (IOException) { }
    }

    /// <summary>The shared data folder sits beside the repository (or inside it): look upward from the test binaries.</summary>
    private static string MagicFile()
    {
        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
        {
            foreach (var candidate in new[] { Path.Combine(dir.FullName, "shared", "data", "magic04", "magic04.data"), Path.Combine(dir.FullName, "..", "shared", "data", "magic04", "magic04.data") })
            {
                if (File.Exists(candidate)) return candidate;
            }
        }

        throw new FileNotFoundException("shared/data/magic04/magic04.data was not found beside or above the repository; CI lays shared/ beside the clone.");
    }

    // Cheaper ranges than the defaults (fewer trees), so 100 looks per seed fit in seconds.
    private const string Space = """
        {"trainers":[
          {"trainer":"fasttree","parameters":{"trees":{"scale":"log-integer","low":10,"high":60}}},
          {"trainer":"lightgbm","parameters":{"iterations":{"scale":"log-integer","low":10,"high":60}}},
          {"trainer":"sdca-logistic"},
          {"trainer":"fastforest","parameters":{"trees":{"scale":"log-integer","low":10,"high":30}}},
          {"trainer":"lbfgs-logistic"}]}
        """;

    [Fact]
    public void On_magic04_the_bound_holds_on_the_sealed_test_set_and_the_raw_best_is_optimistic()
    {
        var data = Path.Combine(_folder, "magic04.csv");
        File.WriteAllText(data, Header + "\n" + File.ReadAllText(MagicFile()), new UTF8Encoding(false));
        var space = Path.Combine(_folder, "space.json");
        File.WriteAllText(space, Space);
        var optimism = new List<double>();
        foreach (var seed in new[] { 1, 2, 3 })
        {
            var ledger = Path.Combine(_folder, $"seed{seed}.db");
            using var book = Bookkeeper.Create(ledger);
            var search = new TabularSearch(book, ledger);
            // 500 validation rows (a small holdout), 11,412 sealed test rows, about 7,100 training rows.
            var outcome = search.Run(new TabularSearchOptions
            {
                DataPath = data, Label = "class", Looks = 100, Seed = seed, SpacePath = space,
                ValidationFraction = 500.0 / 19020, TestFraction = 0.6,
            });
            Assert.Equal(100, outcome.Statement.Looks);
            Assert.Equal(500, outcome.ValidationRows);
            var (test, rows, _) = search.ScoreTest(Search.SearchRecord.Read(outcome.RecordPath));
            Assert.Equal(11412, rows);
            var binomial = outcome.Statement.Bounds.Single(b => b.Method == "binomial-union");
            Assert.True(binomial.Bound >= test, $"seed {seed}: binomial-union {binomial.Bound:F4} below the test error {test:F4}");
            optimism.Add(test - outcome.Statement.Best!.Score);
        }

        // Across seeds the best validation error sits below the test error of the model it picked.
        Assert.True(optimism.Average() > 0, $"mean optimism {optimism.Average():F4} over {string.Join(", ", optimism.Select(o => o.ToString("F4")))}");
    }
}
