using System.Globalization;
using Accountant;
using Accountant.Guards;

// Usage: accountant-load-writer LEDGER HOLDOUT WRITER COUNT [guarded [FIRST]]
// Records COUNT looks through the library, one transaction each, on one open ledger, and prints
// "ack NUMBER CONFIGURATION" after each acknowledged look, so the test can check every one of them.
// With "guarded", look i (from FIRST, default 0) is an adaptive look released on the shared Ladder stream when i is even
// and on the shared Thresholdout stream when it is odd, with a score and a training score fixed by (WRITER, i); the line is
// "ack NUMBER RELEASED CONFIGURATION", RELEASED being the value told ("refused" when the guard refused).
if (args.Length is not (4 or 5 or 6) || (args.Length >= 5 && args[4] != "guarded"))
{
    Console.Error.WriteLine("usage: accountant-load-writer LEDGER HOLDOUT WRITER COUNT [guarded [FIRST]]");
    return 2;
}

var writer = int.Parse(args[2], CultureInfo.InvariantCulture);
var count = int.Parse(args[3], CultureInfo.InvariantCulture);
var guarded = args.Length >= 5;
var first = args.Length == 6 ? int.Parse(args[5], CultureInfo.InvariantCulture) : 0;
// ACCOUNTANT_LOAD_PAUSE_MS slows a writer down between looks, so that a test can kill it part-way.
var pause = int.TryParse(Environment.GetEnvironmentVariable("ACCOUNTANT_LOAD_PAUSE_MS"), NumberStyles.None, CultureInfo.InvariantCulture, out var ms) ? ms : 0;
try
{
    // Every writer gives the same Thresholdout seed, so the stream's noise (and the test's counts) do not depend on which
    // writer declares it, nor on a random seed.
    using var book = Bookkeeper.Open(args[0]);
    book.GuardSeed = GuardedLooks.Seed;
    for (var i = first; i < first + count; i++)
    {
        var configuration = $"{{\"writer\":{writer},\"i\":{i}}}";
        if (!guarded)
        {
            var look = book.Record(args[1], configuration, ((writer * 1000 + i) % 997) / 1000.0);
            Console.Out.WriteLine($"ack {look.Number.ToString(CultureInfo.InvariantCulture)} {look.Configuration}");
        }
        else
        {
            var look = book.RecordMany(args[1], [GuardedLooks.Input(writer, i, configuration)])[0];
            var told = look.Release!.Value is { } v ? v.ToString("R", CultureInfo.InvariantCulture) : "refused";
            Console.Out.WriteLine($"ack {look.Number.ToString(CultureInfo.InvariantCulture)} {told} {look.Configuration}");
        }

        Console.Out.Flush();
        if (pause > 0) Thread.Sleep(pause);
    }

    return 0;
}
catch (AccountantException e)
{
    Console.Error.WriteLine($"accountant-load-writer: {e.Message}");
    return 5;
}

/// <summary>The guarded looks the load tests write: the streams, and each look's scores as a fixed function of (writer, i).</summary>
public static class GuardedLooks
{
    public const string LadderStream = "ladder-shared";
    public const string ThresholdoutStream = "thresholdout-shared";
    public static readonly GuardSpec Ladder = GuardSpec.Ladder(0.01);
    public static readonly GuardSpec Thresholdout = GuardSpec.Thresholdout(0.02, 0.01, 40);
    public const ulong Seed = 20261203;

    public static LookInput Input(int writer, int i, string configuration)
    {
        // Scores on a 1/1000 grid that drift down as a search improves, with a spread so that the Ladder both holds and
        // steps, and training scores that sometimes sit far below the holdout's so that Thresholdout answers from it.
        var h = (uint)((writer + 1) * 7919 + i * 104729) % 1000;
        var score = Math.Round(Math.Clamp(0.45 - 0.002 * i + (h % 61) / 1000.0, 0, 1), 3);
        var train = Math.Round(Math.Clamp(score - (h % 5 == 0 ? 0.08 : 0.01), 0, 1), 3);
        var onLadder = i % 2 == 0;
        return new LookInput
        {
            Configuration = configuration,
            Score = score,
            Adaptive = true,
            Guard = onLadder ? Ladder : Thresholdout,
            Stream = onLadder ? LadderStream : ThresholdoutStream,
            TrainScore = onLadder ? null : train,
        };
    }
}
