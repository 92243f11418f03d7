using Accountant.Bounds;
using Accountant.Guards;
using Accountant.Ledger;
using Accountant.Statements;

namespace Accountant;

/// <summary>One look to record: a configuration with either its predictions or, when only that is known, its score.</summary>
public sealed record LookInput
{
    /// <summary>The configuration as JSON (an object); stored in canonical form.</summary>
    public required string Configuration { get; init; }

    /// <summary>The look's score on the holdout, when predictions are not available.</summary>
    public double? Score { get; init; }

    /// <summary>One prediction per holdout example; the losses and the score are computed from them.</summary>
    public IReadOnlyList<Prediction>? Predictions { get; init; }

    /// <summary>
    /// Per-example losses the caller computed, in the holdout's id order: a bitset (bit i of byte i/8, least significant
    /// first, 1 = error) for 0/1 metrics, little-endian float32 otherwise. The score is computed from them. For batch
    /// ingest from code that already holds the losses; predictions are checked against the holdout's ids and labels,
    /// these only against its size.
    /// </summary>
    public byte[]? Losses { get; init; }

    /// <summary>A label grouping the looks of one search process.</summary>
    public string? Search { get; init; }

    /// <summary>The fidelity of a partial evaluation, e.g. a fraction of the training budget.</summary>
    public string? Stage { get; init; }

    /// <summary>Whether the configuration was chosen using earlier scores on the same holdout.</summary>
    public bool Adaptive { get; init; }

    /// <summary>How long training took, in seconds, when known.</summary>
    public double? Seconds { get; init; }

    /// <summary>The guard that releases the score to the search; null when the search is simply shown the score.</summary>
    public GuardSpec? Guard { get; init; }

    /// <summary>The guard stream to release on (a name of the holdout's); null for the stream named by the guard's spelling.
    /// A stream keeps one guard: naming it with another guard is refused.</summary>
    public string? Stream { get; init; }

    /// <summary>The configuration's score on its training data (Thresholdout compares against it).</summary>
    public double? TrainScore { get; init; }
}

/// <summary>
/// The library's front door: open a ledger, register a holdout, record looks from a training loop, read a statement.
/// Every method checks its input completely before it writes, so an error leaves the ledger as it was.
/// </summary>
/// <example>
/// <code>
/// using var book = Bookkeeper.Open("accountant.db");
/// var look = book.Record("validation", """{"trainer":"fasttree","leaves":31}""", predictions);
/// var statement = book.Statement("validation");
/// </code>
/// </example>
public sealed partial class Bookkeeper : IDisposable
{
    public const int MaxNameLength = 200;

    /// <summary>Batches at least this large are checked and canonicalized in parallel.</summary>
    private const int ParallelBatch = 256;

    public Bookkeeper(ILedgerStore store) => Store = store;

    public ILedgerStore Store { get; }

    /// <summary>
    /// The noise seed of a Thresholdout stream this object declares (its first look); null draws a random one. The seed is
    /// recorded with the stream, and every later release on it, by any process, draws its noise from that seed.
    /// </summary>
    public ulong? GuardSeed { get; set; }

    /// <summary>Creates a new ledger: a SQLite file path, or a PostgreSQL address (see <see cref="LedgerLocation"/>).</summary>
    public static Bookkeeper Create(string location, TimeProvider? clock = null) => new(LedgerStores.Create(location, clock));

    /// <summary>Opens an existing ledger: a SQLite file path, or a PostgreSQL address.</summary>
    public static Bookkeeper Open(string location, TimeProvider? clock = null) => new(LedgerStores.Open(location, clock));

    /// <summary>Opens the ledger, creating it first when there is none.</summary>
    public static Bookkeeper OpenOrCreate(string location, TimeProvider? clock = null) => new(LedgerStores.OpenOrCreate(location, clock));

    /// <summary>
    /// Registers a validation set. Ids are trimmed and must be unique and non-empty; labels are canonicalized
    /// (<see cref="Fingerprint.CanonicalLabel"/>); regression metrics need numeric labels and a declared loss range.
    /// </summary>
    public Holdout RegisterHoldout(string name, IEnumerable<HoldoutExample> examples, Metric metric = Metric.Error, LossRange? lossRange = null)
    {
        CheckName(name, "holdout name");
        var range = metric.IsZeroOne() || metric == Metric.Auc ? LossRange.Unit : lossRange ?? throw AccountantException.BadArguments(
            $"{metric.Name()} needs a declared loss range that each example's loss is clipped to; give --loss-range LO,HI, for example 0,10.");
        if (metric.IsZeroOne() && lossRange is { } given && given != LossRange.Unit)
        {
            throw AccountantException.BadArguments($"{metric.Name()} uses 0/1 losses, so its loss range is 0,1; leave out --loss-range.");
        }

        if (metric == Metric.Auc && lossRange is { } aucRange && aucRange != LossRange.Unit)
        {
            throw AccountantException.BadArguments("auc lies in [0, 1]; leave out --loss-range.");
        }

        var prepared = new List<HoldoutExample>();
        var seen = new Dictionary<string, int>(StringComparer.Ordinal);
        // Labels repeat (a handful of classes over many examples): each distinct spelling is canonicalized once.
        var canonical = new Dictionary<string, string>(StringComparer.Ordinal);
        var row = 0;
        foreach (var example in examples)
        {
            row++;
            var id = example.Id.Trim();
            if (id.Length == 0)
            {
                throw AccountantException.BadInput($"example {row} of the holdout has an empty id; give every example a unique id.");
            }

            if (!seen.TryAdd(id, row))
            {
                throw AccountantException.BadInput($"examples {seen[id]} and {row} of the holdout share the id '{Losses.Shorten(id)}' (after trimming spaces); ids must be unique.");
            }

            if (!canonical.TryGetValue(example.Label, out var label))
            {
                label = Fingerprint.CanonicalLabel(example.Label);
                if (canonical.Count < 4096) canonical[example.Label] = label;
            }

            if (label.Length == 0)
            {
                throw AccountantException.BadInput($"example '{Losses.Shorten(id)}' of the holdout has an empty label; give every example its label.");
            }

            if (metric == Metric.Auc && label is not ("0" or "1"))
            {
                throw AccountantException.BadInput($"example '{Losses.Shorten(id)}' has the label '{Losses.Shorten(label)}'; auc needs binary labels written 1 (positive) or 0 (negative).");
            }

            if (metric is Metric.AbsoluteError or Metric.SquaredError && !(double.TryParse(label, System.Globalization.NumberStyles.Float, System.Globalization.CultureInfo.InvariantCulture, out var numeric) && double.IsFinite(numeric)))
            {
                throw AccountantException.BadInput($"example '{Losses.Shorten(id)}' has the label '{Losses.Shorten(label)}', which is not a finite number; {metric.Name()} needs numeric labels written with a '.' decimal point.");
            }

            prepared.Add(new HoldoutExample(id, label));
        }

        if (prepared.Count == 0)
        {
            throw AccountantException.BadInput("the holdout has no examples; give a labels file with a header and at least one row.");
        }

        if (metric == Metric.Auc && (prepared.All(e => e.Label == "1") || prepared.All(e => e.Label == "0")))
        {
            throw AccountantException.BadInput("an auc holdout needs both positive (1) and negative (0) examples.");
        }

        // Sorted by id, ordinal (ids are unique, so the order is total); keys and items side by side sort fastest.
        var ids = new string[prepared.Count];
        var items = prepared.ToArray();
        for (var i = 0; i < items.Length; i++) ids[i] = items[i].Id;
        Array.Sort(ids, items, StringComparer.Ordinal);
        return Store.AddHoldout(name, metric, range, items);
    }

    /// <summary>
    /// Registers the holdout, or returns the registered one of that name when its examples, metric and range are the same
    /// (so a rerun keeps counting looks on it); refuses a different holdout under the same name.
    /// </summary>
    public Holdout EnsureHoldout(string name, IReadOnlyList<HoldoutExample> examples, Metric metric = Metric.Error, LossRange? lossRange = null)
    {
        var existing = Store.FindHoldout(name);
        if (existing is null)
        {
            try
            {
                return RegisterHoldout(name, examples, metric, lossRange);
            }
            catch (AccountantException) when ((existing = Store.FindHoldout(name)) is not null)
            {
                // Another process (a worker of the same shared search) registered it meanwhile: compare with that one.
            }
        }

        var sorted = examples.Select(e => new HoldoutExample(e.Id.Trim(), Fingerprint.CanonicalLabel(e.Label)))
            .OrderBy(e => e.Id, StringComparer.Ordinal).ToList();
        if (existing.Fingerprint != Fingerprint.Compute(sorted) || existing.Metric != metric)
        {
            throw AccountantException.BadInput($"the ledger already has a holdout named '{name}' with other examples or another metric; use a new ledger or another holdout name.");
        }

        return existing;
    }

    /// <summary>The registered holdout of that name, or a clear error.</summary>
    public Holdout Holdout(string name) =>
        Store.FindHoldout(name) ?? throw AccountantException.BadArguments(
            Store.Holdouts().Count == 0
                ? $"there is no holdout named '{name}'; the ledger has none yet; register one with 'accountant holdout add {name} --labels FILE'."
                : $"there is no holdout named '{name}'; 'accountant holdout list' shows the registered ones.");

    /// <summary>Records one look from its predictions; returns it with its number and observed score.</summary>
    public Look Record(string holdout, string configuration, IReadOnlyList<Prediction> predictions, string? search = null, string? stage = null, bool adaptive = false) =>
        RecordMany(holdout, [new LookInput { Configuration = configuration, Predictions = predictions, Search = search, Stage = stage, Adaptive = adaptive }])[0];

    /// <summary>Records one look from its score alone.</summary>
    public Look Record(string holdout, string configuration, double score, string? search = null, string? stage = null, bool adaptive = false) =>
        RecordMany(holdout, [new LookInput { Configuration = configuration, Score = score, Search = search, Stage = stage, Adaptive = adaptive }])[0];

    /// <summary>
    /// Records many looks in one transaction: every input is checked first, and if any is bad nothing is written.
    /// Errors name the input's position (1-based).
    /// </summary>
    public IReadOnlyList<Look> RecordMany(string holdoutName, IReadOnlyList<LookInput> inputs, Func<int, string>? describe = null)
    {
        var holdout = Holdout(holdoutName);
        IReadOnlyList<HoldoutExample>? examples = inputs.Any(i => i.Predictions is not null) ? Store.Examples(holdout) : null;
        var prepared = new NewLook[inputs.Count];
        var failures = new AccountantException?[inputs.Count];
        void PrepareOne(int i)
        {
            try
            {
                prepared[i] = Prepare(holdout, inputs[i], ref examples);
            }
            catch (AccountantException e)
            {
                failures[i] = e;
            }
        }

        // Large batches are checked on every core (each input on its own); the first bad input, in order, is reported.
        if (inputs.Count >= ParallelBatch)
        {
            Parallel.For(0, inputs.Count, PrepareOne);
        }
        else
        {
            for (var i = 0; i < inputs.Count; i++)
            {
                PrepareOne(i);
                if (failures[i] is not null) break;
            }
        }

        var first = Array.FindIndex(failures, f => f is not null);
        if (first >= 0) throw Positioned(failures[first]!, first, inputs.Count, describe);
        if (!inputs.Any(i => i.Guard is not null)) return Store.AppendLooks(holdout, prepared);

        // Guards keep state from one release to the next: they are applied in order, inside the write transaction, from the
        // streams' state as the ledger holds it once the chain's lock is held, so that writers sharing a stream release one
        // after the other, exactly as a single writer would, and a restarted writer continues where the stream left off.
        return Store.AppendLooks(holdout, () =>
        {
            var streams = new Dictionary<string, OpenStream>(StringComparer.Ordinal);
            var space = Space(holdout, ref examples);
            var released = (NewLook[])prepared.Clone();
            for (var i = 0; i < inputs.Count; i++)
            {
                if (inputs[i].Guard is not { } guard) continue;
                try
                {
                    released[i] = Release(holdout, prepared[i], guard, inputs[i], space, streams);
                }
                catch (AccountantException e)
                {
                    throw Positioned(e, i, inputs.Count, describe);
                }
            }

            return released;
        });
    }

    private static AccountantException Positioned(AccountantException e, int index, int count, Func<int, string>? describe)
    {
        if (count == 1 && describe is null) return e;
        var where = describe?.Invoke(index) ?? $"look {index + 1} of {count}";
        return new AccountantException(e.Kind, $"{where}: {e.Message} Nothing was recorded.", e);
    }

    private NewLook Prepare(Holdout holdout, LookInput input, ref IReadOnlyList<HoldoutExample>? examples)
    {
        var configuration = ConfigurationJson.Canonicalize(input.Configuration);
        if (input.Search is not null) CheckName(input.Search, "search label");
        if (input.Stream is not null)
        {
            CheckName(input.Stream, "guard stream name");
            if (input.Guard is null) throw AccountantException.BadArguments($"the guard stream '{input.Stream}' needs its guard; give --guard SPEC with --stream.");
        }
        if (input.Stage is not null) CheckName(input.Stage, "stage");
        if ((input.Predictions is not null ? 1 : 0) + (input.Score is not null ? 1 : 0) + (input.Losses is not null ? 1 : 0) > 1)
        {
            throw AccountantException.BadArguments("give one of predictions, per-example losses or a score for a look, not several.");
        }

        if (input.Losses is { } given)
        {
            var (encoding, fromLosses) = LossInput.Check(holdout, given);
            return new NewLook(configuration, fromLosses, encoding, given, input.Search, input.Stage, input.Adaptive, input.Seconds);
        }

        if (input.Predictions is { } predictions)
        {
            examples ??= Store.Examples(holdout);
            var losses = Losses.Compute(holdout, examples, predictions);
            return new NewLook(configuration, losses.Score, losses.Encoding, losses.Bytes, input.Search, input.Stage, input.Adaptive, input.Seconds);
        }

        if (input.Score is not { } score)
        {
            throw AccountantException.BadArguments("a look needs its predictions or its score; give --predictions FILE or --score X.");
        }

        Losses.CheckScore(holdout, score);
        return new NewLook(configuration, score, LossEncoding.None, null, input.Search, input.Stage, input.Adaptive, input.Seconds);
    }

    /// <summary>A guard stream while a batch releases on it: its guard, noise, state, and whether this batch declares it.</summary>
    private sealed class OpenStream(GuardStream stream, GuardState state, bool declared)
    {
        public GuardStream Stream { get; } = stream;
        public GuardState State { get; set; } = state;
        public bool Declared { get; set; } = declared;
        public IGuardNoise? Noise { get; } = stream.Seed is { } seed ? new SeededGuardNoise(seed) : null;
    }

    /// <summary>
    /// Releases one look's score on its stream (<see cref="LookInput.Stream"/>, else the guard's spelling), reading the
    /// stream's state from the ledger the first time the batch uses it; a stream used for the first time is declared with
    /// its guard and, for Thresholdout, a noise seed (<see cref="GuardSeed"/>, else a random one), in the same transaction.
    /// </summary>
    private NewLook Release(Holdout holdout, NewLook look, GuardSpec guard, LookInput input, ValueSpace space, Dictionary<string, OpenStream> streams)
    {
        var name = input.Stream ?? guard.ToString();
        if (!streams.TryGetValue(name, out var stream))
        {
            var recorded = Store.FindGuardStream(holdout, name);
            if (recorded is not null) CheckStreamGuard(holdout, name, recorded.Guard, guard);
            if (recorded?.Declared is { Seed: { } declaredSeed } && GuardSeed is { } wanted && wanted != declaredSeed && guard.Kind == GuardKind.Thresholdout)
            {
                throw AccountantException.BadArguments($"the guard stream '{name}' on holdout '{holdout.Name}' draws its noise from seed {declaredSeed}, not {wanted}; leave out --seed (or give {declaredSeed}) to continue it, or name a new stream with --stream NAME.");
            }

            var declaration = recorded?.Declared ?? new GuardStream(name, guard, guard.Kind == GuardKind.Thresholdout ? GuardSeed ?? NewSeed() : null);
            streams[name] = stream = new OpenStream(declaration, recorded?.State ?? GuardState.Empty, recorded?.Declared is not null);
        }
        else
        {
            CheckStreamGuard(holdout, name, stream.Stream.Guard, guard);
        }

        var release = Guard.Apply(guard, stream.State, look.Score, space, holdout.Metric.HigherIsBetter(), input.TrainScore, stream.Noise);
        var index = stream.State.Releases;
        stream.State = stream.State.After(release);
        var opens = stream.Declared ? null : stream.Stream;
        stream.Declared = true;
        return look with
        {
            Release = new Released(guard.ToString(), release.Value, release.HoldoutAnswered, input.TrainScore) { Stream = name, Index = index, Answers = stream.State.HoldoutAnswers },
            Opens = opens,
        };
    }

    private static void CheckStreamGuard(Holdout holdout, string name, GuardSpec streams, GuardSpec given)
    {
        if (streams.ToString() != given.ToString())
        {
            throw AccountantException.BadArguments($"the guard stream '{name}' on holdout '{holdout.Name}' releases by {streams}, not {given}; give --guard {streams} for it, or name a new stream with --stream NAME.");
        }
    }

    private static ulong NewSeed() => BitConverter.ToUInt64(System.Security.Cryptography.RandomNumberGenerator.GetBytes(8));

    /// <summary>The values a released score on this holdout can take, for counting release sequences.</summary>
    public ValueSpace Space(Holdout holdout)
    {
        IReadOnlyList<HoldoutExample>? examples = null;
        return Space(holdout, ref examples);
    }

    private ValueSpace Space(Holdout holdout, ref IReadOnlyList<HoldoutExample>? examples)
    {
        var known = examples;
        var space = ValueSpace.Of(holdout.Metric, holdout.Size, holdout.LossRange, () => (known ??= Store.Examples(holdout)).Count(e => e.Label == Losses.PositiveLabel));
        examples = known;
        return space;
    }

    /// <summary>Records an opening of the holdout's sealed test set for one look's configuration. Every opening is kept and counted.</summary>
    public TestOpening RecordOpening(string holdoutName, int lookNumber, int testSize, string testFingerprint, double testScore)
    {
        if (!double.IsFinite(testScore))
        {
            throw AccountantException.BadInput("the test score is not a finite number; nothing was recorded.");
        }

        return Store.AppendOpening(Holdout(holdoutName), lookNumber, testSize, testFingerprint, testScore);
    }

    /// <summary>Marks a look as a mistake. It cannot be selected any more, and it still counts.</summary>
    public LookVoid Void(string holdoutName, int lookNumber, string reason)
    {
        if (string.IsNullOrWhiteSpace(reason))
        {
            throw AccountantException.BadArguments("a void needs a reason; give --reason TEXT saying why the look was a mistake.");
        }

        return Store.AppendVoid(Holdout(holdoutName), lookNumber, reason);
    }

    public Statement Statement(string holdoutName, StatementOptions? options = null)
    {
        var holdout = Holdout(holdoutName);
        options ??= new StatementOptions();
        PerExampleMethods.Check(holdout, options);
        var voids = Store.Voids(holdout);
        var inputs = Inputs(holdout);
        if (!options.Estimates && !options.Winner)
        {
            // Counts and the best look first: no other look's configuration is read, and per-example losses only when the
            // correlation-aware guarantee applies (every look non-adaptive with 0/1 losses), streamed once.
            var tally = Store.Tally(holdout, voids.Select(v => v.LookNumber).ToHashSet());
            return StatementBuilder.Build(holdout, tally, voids, Store.ChainHead(), options, WithChained(holdout, tally, inputs));
        }

        // The methods that need per-example losses (--estimates, --winner) read every look.
        var looks = Store.Looks(holdout);
        var voidedNumbers = voids.Select(v => v.LookNumber).ToHashSet();
        var all = new LookTally(looks.Count, looks.Count(l => l.Adaptive), looks.Count(l => !l.HasLosses), StatementBuilder.SelectBest(holdout.Metric, looks, voidedNumbers),
            looks.Any(l => l.Adaptive) ? looks.Select(StatementBuilder.Accounted).ToList() : null);
        var statement = StatementBuilder.Build(holdout, all, voids, Store.ChainHead(), options, WithChained(holdout, all, inputs));
        return PerExampleMethods.Add(statement, Store, looks, voids);
    }

    /// <summary>The statement's inputs with the correlation-aware guarantee's anchors, or the reason it is left out.</summary>
    private StatementInputs WithChained(Holdout holdout, LookTally tally, StatementInputs inputs)
    {
        var why = CorrelationAware.NotApplicable(holdout, tally);
        if (!CorrelationAware.Applies(why)) return inputs with { ChainedNote = why };
        var (chained, note) = CorrelationAware.Build(holdout, Store.LossRows(holdout), tally.Best!.Number);
        return inputs with { Chained = chained, ChainedNote = note };
    }

    /// <summary>What a statement on this holdout needs beyond its looks: the AUC's positives, per-example losses on demand, the openings.</summary>
    public StatementInputs Inputs(Holdout holdout)
    {
        long? positives = holdout.Metric == Metric.Auc ? Store.Examples(holdout).Count(e => e.Label == Losses.PositiveLabel) : null;
        return new StatementInputs(positives is { } p ? ValueSpace.Auc(p, holdout.Size - p) : null, positives, look => Store.LossBytes(holdout, look.Number), Store.Openings(holdout));
    }

    public ChainReport Verify(string? expectedHead = null) => Store.Verify(expectedHead);

    private static void CheckName(string name, string what)
    {
        if (string.IsNullOrWhiteSpace(name))
        {
            throw AccountantException.BadArguments($"the {what} is empty; give a short name such as 'validation'.");
        }

        if (name.Length > MaxNameLength)
        {
            throw AccountantException.BadArguments($"the {what} is {name.Length} characters long; keep it within {MaxNameLength}.");
        }

        if (name.Any(char.IsControl))
        {
            throw AccountantException.BadArguments($"the {what} contains control characters (such as a line break or tab); use printable characters only.");
        }
    }

    public void Dispose() => Store.Dispose();
}
