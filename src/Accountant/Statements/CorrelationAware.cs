using System.Text.Json;
using Accountant.Bounds;
using Accountant.Comparisons;
using Accountant.Ledger;

namespace Accountant.Statements;

/// <summary>One anchor of chained-binomial as a statement reports it: which looks vote, its error count and weight, and the
/// selected look's increments against it.</summary>
public sealed record ChainedAnchor(string Name, int Members, long Errors, double Weight, long OnlyLook, long OnlyAnchor);

/// <summary>What chained-binomial needs from a holdout's per-example losses: the looks it unions over and the anchors.</summary>
public sealed record ChainedInputs(int Looks, IReadOnlyList<ChainedAnchor> Anchors)
{
    public IReadOnlyList<ChainedBinomial.Anchor> Counts => Anchors.Select(a => new ChainedBinomial.Anchor(a.Errors, a.Weight)).ToList();

    public IReadOnlyList<ChainedBinomial.Increment> Increments => Anchors.Select(a => new ChainedBinomial.Increment(a.OnlyLook, a.OnlyAnchor)).ToList();
}

/// <summary>
/// Decides whether the correlation-aware guarantee (<see cref="ChainedBinomial"/>) applies to a statement and, when it
/// does, builds its anchors from every look's recorded 0/1 losses. It applies to error and accuracy holdouts with two looks
/// or more, none adaptive, every one with per-example losses; otherwise the statement keeps the union bounds and says why.
/// Looks are grouped by the <c>trainer</c> of their configuration (a fact of the configuration, fixed before it was scored).
/// </summary>
public static class CorrelationAware
{
    public const string GroupKey = "trainer";

    public const string Reference = "two-level chaining (Dudley 1967, J. Funct. Anal. 1:290; Talagrand 2005, The Generic Chaining) through majority-vote anchors, each stage an exact binomial tail (Clopper & Pearson 1934, Biometrika 26:404) with a union bound";

    /// <summary>Why the method cannot be used, from the counts alone (before any loss is read); null when it can.</summary>
    public static string? NotApplicable(Holdout holdout, LookTally tally)
    {
        if (!holdout.Metric.IsZeroOne() || tally.Looks < 2 || tally.Best is null) return null;
        if (tally.Adaptive > 0)
        {
            return $"{ChainedBinomial.Name} is for looks fixed in advance; {tally.Adaptive} look(s) here are adaptive, so the bound is the union over release sequences.";
        }

        if (tally.ScoreOnly > 0)
        {
            return $"{ChainedBinomial.Name} needs every look's per-example losses, but {tally.ScoreOnly} of {tally.Looks} looks carry only a score, so the statement uses the union bound over all {tally.Looks} looks; record predictions (not scores) to let correlated configurations cost less.";
        }

        return "";
    }

    /// <summary>Whether the method applies: <see cref="NotApplicable"/> returned the empty string.</summary>
    public static bool Applies(string? notApplicable) => notApplicable is { Length: 0 };

    /// <summary>
    /// Streams every look's losses into the anchors and counts the selected look against them. Returns the inputs, or a note
    /// saying why they could not be built (a look whose losses are missing or of the wrong length).
    /// </summary>
    public static (ChainedInputs? Inputs, string? Note) Build(Holdout holdout, IEnumerable<LossRow> rows, int selected)
    {
        var anchors = new MajorityAnchors(holdout.Size);
        byte[]? best = null;
        var looks = 0;
        var bytes = (holdout.Size + 7) / 8;
        foreach (var row in rows)
        {
            if (row.Encoding != LossEncoding.Bitset || row.Losses is null)
            {
                return (null, $"look {row.Number} carries no per-example 0/1 losses, so {ChainedBinomial.Name} cannot be computed and the statement uses the union bound; record predictions for every look.");
            }

            if (row.Losses.Length != bytes)
            {
                return (null, $"look {row.Number}'s per-example losses hold {row.Losses.Length} bytes where the holdout's {holdout.Size} examples need {bytes}, so {ChainedBinomial.Name} is left out and the statement uses the union bound; run 'accountant verify'.");
            }

            anchors.Add(row.Losses, Group(row.Configuration));
            if (row.Number == selected) best = row.Losses;
            looks++;
        }

        if (best is null || looks < 2) return (null, null);
        var vectors = anchors.Anchors();
        var (_, increments) = anchors.Against(vectors, best);
        var lines = vectors.Select((v, i) => new ChainedAnchor(v.Name, v.Members, v.Errors, v.Weight, increments[i].OnlyLook, increments[i].OnlyAnchor)).ToList();
        return (new ChainedInputs(looks, lines), null);
    }

    /// <summary>The configuration's group: its top-level <c>trainer</c> when that is a string, else none.</summary>
    public static string? Group(string configuration)
    {
        var reader = new Utf8JsonReader(System.Text.Encoding.UTF8.GetBytes(configuration));
        if (!reader.Read() || reader.TokenType != JsonTokenType.StartObject) return null;
        while (reader.Read() && reader.TokenType == JsonTokenType.PropertyName)
        {
            var isKey = reader.ValueTextEquals(GroupKey);
            reader.Read();
            if (isKey) return reader.TokenType == JsonTokenType.String ? reader.GetString() : null;
            reader.Skip();
        }

        return null;
    }
}
