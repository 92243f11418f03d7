using Accountant.Search.Trainers;

namespace Accountant.Search;

/// <summary>What a strategy may know of a finished look: its configuration and the value the guard told (never the score itself).</summary>
public sealed record ToldLook(TrainerConfiguration Configuration, double? Told);

/// <summary>Chooses configurations. A strategy sees only released values, so its adaptive looks are what the accounting counts.</summary>
public interface ISearchStrategy
{
    /// <summary>The next configuration, and whether it was chosen using earlier released values (adaptive).</summary>
    (TrainerConfiguration Configuration, bool Adaptive) Next(int index, IReadOnlyList<ToldLook> history);
}

/// <summary>Random search: every configuration drawn in advance (non-adaptive); trainers in turn.</summary>
public sealed class RandomStrategy(IReadOnlyList<TrainerSpace> space, int looks, int seed) : ISearchStrategy
{
    private readonly List<TrainerConfiguration> _plan = BinaryTrainers.RandomConfigurations(space, looks, seed);

    public (TrainerConfiguration, bool) Next(int index, IReadOnlyList<ToldLook> history) => (_plan[index], false);
}

/// <summary>
/// Local refinement: the first looks (a fifth, at least one per trainer) are random and fixed in advance; each later look
/// nudges every hyperparameter of the configuration with the best value told so far (the latest on ties). Lower told
/// values are better unless <paramref name="higherIsBetter"/>.
/// </summary>
public sealed class RefineStrategy(IReadOnlyList<TrainerSpace> space, int looks, int seed, bool higherIsBetter = false) : ISearchStrategy
{
    private readonly Random _random = new(seed);
    private readonly List<TrainerConfiguration> _start = BinaryTrainers.RandomConfigurations(space, Math.Max(space.Count, looks / 5), seed);

    public int FixedLooks => _start.Count;

    public (TrainerConfiguration, bool) Next(int index, IReadOnlyList<ToldLook> history)
    {
        if (index < _start.Count)
        {
            return (_start[index], false);
        }

        ToldLook? best = null;
        foreach (var look in history)
        {
            if (look.Told is not { } told) continue;
            if (best is null || (higherIsBetter ? told >= best.Told : told <= best.Told)) best = look;
        }

        if (best is null)
        {
            // Nothing was told (a guard refused everything): fall back to a fresh random configuration, still adaptive.
            return (space[_random.Next(space.Count)].Sample(_random), true);
        }

        var trainer = space.Single(s => s.Trainer == best.Configuration.Trainer);
        return (trainer.Neighbour(best.Configuration, _random), true);
    }
}

/// <summary>
/// Grid search: for each trainer, an even grid over each hyperparameter's range (on its own scale), as many points per
/// hyperparameter as keep the trainer's share of the looks, taken in order; non-adaptive.
/// </summary>
public sealed class GridStrategy : ISearchStrategy
{
    private readonly List<TrainerConfiguration> _plan = [];

    public GridStrategy(IReadOnlyList<TrainerSpace> space, int looks)
    {
        var perTrainer = Enumerable.Range(0, space.Count).Select(t => looks / space.Count + (t < looks % space.Count ? 1 : 0)).ToList();
        var grids = space.Select((s, t) => Grid(s, perTrainer[t])).ToList();
        // Interleave the trainers so that a stopped search has tried each of them.
        for (var i = 0; _plan.Count < looks && grids.Any(g => i < g.Count); i++)
        {
            foreach (var g in grids.Where(g => i < g.Count)) if (_plan.Count < looks) _plan.Add(g[i]);
        }
    }

    public int Count => _plan.Count;

    private static List<TrainerConfiguration> Grid(TrainerSpace space, int budget)
    {
        if (budget <= 0) return [];
        var d = space.Parameters.Count;
        var points = Math.Max(1, (int)Math.Floor(Math.Pow(budget, 1.0 / Math.Max(1, d)) + 1e-9));
        var axes = space.Parameters.Select(p => p.GridValues(points)).ToList();
        var all = new List<TrainerConfiguration>();
        var index = new int[d];
        while (true)
        {
            all.Add(new TrainerConfiguration(space.Trainer, space.Parameters.Select((p, i) => (p.Name, axes[i][index[i]])).ToDictionary(x => x.Name, x => x.Item2)));
            var k = d - 1;
            while (k >= 0 && ++index[k] == axes[k].Count) index[k--] = 0;
            if (k < 0) break;
        }

        // Spread the budget evenly through the product when it has more points than the budget.
        return all.Count <= budget ? all : Enumerable.Range(0, budget).Select(i => all[(int)((long)i * all.Count / budget)]).ToList();
    }

    public (TrainerConfiguration, bool) Next(int index, IReadOnlyList<ToldLook> history) => (_plan[index], false);
}

/// <summary>
/// The schedule of successive halving (Jamieson &amp; Talwalkar 2016, AISTATS) with η = 3 over the share of training rows, used
/// by a search of one's own and by a shared one alike: rung i trains ⌊K/3^i⌋ (at least one) configurations on 3^(i − R)
/// of the rows, R = ⌊log₃ K⌋, and promotes the best third by the values told.
/// </summary>
internal static class Halving
{
    public const int Eta = 3;

    /// <summary>R, the index of the last rung, for K configurations in the first.</summary>
    public static int Rungs(int looks) => (int)Math.Floor(Math.Log(looks) / Math.Log(Eta) + 1e-9);

    /// <summary>How many configurations each rung trains.</summary>
    public static IEnumerable<int> Sizes(int looks) => Enumerable.Range(0, Rungs(looks) + 1).Select(i => Math.Max(1, looks / (int)Math.Pow(Eta, i)));

    public static double Fraction(int rung, int rungs) => Math.Pow(Eta, rung - rungs);

    /// <summary>The stage label recorded with a rung's looks.</summary>
    public static string Stage(double fraction) => fraction.ToString("0.####", System.Globalization.CultureInfo.InvariantCulture);

    /// <summary>The best third (at least one) by the values told, lower first unless higher is better; refused values last; ties keep their order.</summary>
    public static List<T> Keep<T>(IReadOnlyList<(T Item, double? Told)> results, bool higherIsBetter)
    {
        var keep = Math.Max(1, results.Count / Eta);
        var ordered = higherIsBetter
            ? results.OrderByDescending(r => r.Told ?? double.NegativeInfinity)
            : results.OrderBy(r => r.Told ?? double.PositiveInfinity);
        return ordered.Take(keep).Select(r => r.Item).ToList();
    }
}
