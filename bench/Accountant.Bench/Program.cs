using System.Diagnostics;
using System.Globalization;
using System.Runtime.Intrinsics;
using Accountant;
using Accountant.Bounds;
using Accountant.Estimates;
using Accountant.Ledger;
using Accountant.Simulation;
using Microsoft.Data.Sqlite;

// A plain harness: each mode prints lines "name value" that bench/run.sh reads. Times are medians of repeated runs
// after a warm-up; the compared implementations run in the same process, one after the other, on the same data.
CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
var mode = args.Length > 0 ? args[0] : "";
var rest = args.Skip(1).ToArray();
return mode switch
{
    "peak" => Peak(),
    "bootstrap" => Bootstrap(rest),
    "ingest" => Ingest(rest),
    "ingest-postgres" => PostgresIngest.Run(rest),
    "ledger-scores" => LedgerScores(rest),
    "ledger-bitsets" => LedgerBitsets(rest),
    "stream-generate" => StreamBench.Generate(rest),
    "stream-mlnet" => StreamBench.MlNet(rest),
    "stream-search" => StreamBench.Search(rest),
    _ => Usage(),
};

static int Usage()
{
    Console.Error.WriteLine("usage: Accountant.Bench peak | bootstrap K N B SEED MATRIX_FILE | ingest DIR | ingest-postgres CONNECTION_STRING | ledger-scores PATH LOOKS | ledger-bitsets PATH K N | stream-generate PATH MB SEED | stream-mlnet PATH | stream-search PATH LEDGER SPACE");
    return 2;
}

static double Median(IEnumerable<double> values)
{
    var sorted = values.Order().ToArray();
    return sorted.Length % 2 == 1 ? sorted[sorted.Length / 2] : (sorted[sorted.Length / 2 - 1] + sorted[sorted.Length / 2]) / 2;
}

static double Time(Action action)
{
    var watch = Stopwatch.StartNew();
    action();
    return watch.Elapsed.TotalSeconds;
}

// The machine's own peak: a tight loop of independent fused multiply-adds (float32) on every core, 512-bit where the
// hardware runs Vector512 natively and 256-bit elsewhere (Vector512 emulated on 256-bit hardware measured half or less of
// the 256-bit rate on a 2-core AVX2 EPYC, side by side).
static int Peak()
{
    const int iterations = 20_000_000;
    var threads = Environment.ProcessorCount;
    var wide = Vector512.IsHardwareAccelerated;
    double Run()
    {
        var watch = Stopwatch.StartNew();
        Parallel.For(0, threads, new ParallelOptions { MaxDegreeOfParallelism = threads }, t =>
        {
            if (wide) Fma512(t, iterations);
            else Fma256(t, iterations);
        });
        return watch.Elapsed.TotalSeconds;
    }

    Run();
    var seconds = Median(Enumerable.Range(0, 3).Select(_ => Run()));
    var flops = 2.0 * (wide ? 16 : 8) * 12 * (double)iterations * threads;
    Console.WriteLine($"fma_peak_gflops {flops / seconds / 1e9:F1}");
    Console.WriteLine($"fma_width_bits {(wide ? 512 : 256)}");
    Console.WriteLine($"threads {threads}");
    return 0;
}

static void Fma512(int t, int iterations)
{
    var m = Vector512.Create(0.999999f);
    var a = Vector512.Create(1e-7f);
    Vector512<float> x0 = Vector512.Create(1f + t), x1 = x0 + a, x2 = x1 + a, x3 = x2 + a, x4 = x3 + a, x5 = x4 + a,
        x6 = x5 + a, x7 = x6 + a, x8 = x7 + a, x9 = x8 + a, x10 = x9 + a, x11 = x10 + a;
    for (var i = 0; i < iterations; i++)
    {
        x0 = Vector512.FusedMultiplyAdd(x0, m, a); x1 = Vector512.FusedMultiplyAdd(x1, m, a);
        x2 = Vector512.FusedMultiplyAdd(x2, m, a); x3 = Vector512.FusedMultiplyAdd(x3, m, a);
        x4 = Vector512.FusedMultiplyAdd(x4, m, a); x5 = Vector512.FusedMultiplyAdd(x5, m, a);
        x6 = Vector512.FusedMultiplyAdd(x6, m, a); x7 = Vector512.FusedMultiplyAdd(x7, m, a);
        x8 = Vector512.FusedMultiplyAdd(x8, m, a); x9 = Vector512.FusedMultiplyAdd(x9, m, a);
        x10 = Vector512.FusedMultiplyAdd(x10, m, a); x11 = Vector512.FusedMultiplyAdd(x11, m, a);
    }

    var sum = x0 + x1 + x2 + x3 + x4 + x5 + x6 + x7 + x8 + x9 + x10 + x11;
    if (Vector512.Sum(sum) == 42f) Console.Write("");
}

static void Fma256(int t, int iterations)
{
    var m = Vector256.Create(0.999999f);
    var a = Vector256.Create(1e-7f);
    Vector256<float> x0 = Vector256.Create(1f + t), x1 = x0 + a, x2 = x1 + a, x3 = x2 + a, x4 = x3 + a, x5 = x4 + a,
        x6 = x5 + a, x7 = x6 + a, x8 = x7 + a, x9 = x8 + a, x10 = x9 + a, x11 = x10 + a;
    for (var i = 0; i < iterations; i++)
    {
        x0 = Vector256.FusedMultiplyAdd(x0, m, a); x1 = Vector256.FusedMultiplyAdd(x1, m, a);
        x2 = Vector256.FusedMultiplyAdd(x2, m, a); x3 = Vector256.FusedMultiplyAdd(x3, m, a);
        x4 = Vector256.FusedMultiplyAdd(x4, m, a); x5 = Vector256.FusedMultiplyAdd(x5, m, a);
        x6 = Vector256.FusedMultiplyAdd(x6, m, a); x7 = Vector256.FusedMultiplyAdd(x7, m, a);
        x8 = Vector256.FusedMultiplyAdd(x8, m, a); x9 = Vector256.FusedMultiplyAdd(x9, m, a);
        x10 = Vector256.FusedMultiplyAdd(x10, m, a); x11 = Vector256.FusedMultiplyAdd(x11, m, a);
    }

    var sum = x0 + x1 + x2 + x3 + x4 + x5 + x6 + x7 + x8 + x9 + x10 + x11;
    if (Vector256.Sum(sum) == 42f) Console.Write("");
}

// The bootstrap of the statement's estimates on K looks × n examples with B resamples, correlated configurations.
static int Bootstrap(string[] a)
{
    int k = int.Parse(a[0]), n = int.Parse(a[1]), b = int.Parse(a[2]);
    var seed = ulong.Parse(a[3]);
    var random = new Random(2026);
    var trueErrors = Enumerable.Range(0, k).Select(j => 0.20 + 0.05 * random.NextDouble()).ToArray();
    var matrix = CorrelatedLosses.Draw(random, trueErrors, n, 0.9);
    // The same losses for NumPy: K rows of n bytes (0/1).
    using (var file = File.Create(a[4]))
    {
        var row = new byte[n];
        for (var j = 0; j < k; j++)
        {
            var words = matrix.Row(j);
            for (var i = 0; i < n; i++) row[i] = (byte)((words[i >> 6] >> (i & 63)) & 1);
            file.Write(row);
        }
    }

    var selectable = Enumerable.Repeat(true, k).ToArray();
    var best = Array.IndexOf(matrix.Errors, matrix.Errors.Min());
    var settings = new BootstrapSettings { Resamples = b, Seed = seed, Confidence = 0.95 };
    BootstrapResult? result = null;
    result = BootstrapEstimates.Run(matrix, selectable, best, settings); // warm-up (JIT)
    var whole = Median(Enumerable.Range(0, 7).Select(_ => Time(() => result = BootstrapEstimates.Run(matrix, selectable, best, settings))));
    BootstrapDraws? draws = null;
    var engine = Median(Enumerable.Range(0, 7).Select(_ => Time(() => draws = BootstrapEngine.Run(matrix, b, seed, selectable))));
    // The kernel(s) that computed the sums: AVX-512BW, AVX2 or scalar, whichever this machine has.
    var kernel = string.Join("+", Enum.GetValues<BootstrapKernel>().Where(x => draws!.Kernels.HasFlag(x)).Select(x => x switch
    {
        BootstrapKernel.Avx512BW => "AVX-512BW",
        BootstrapKernel.Avx2 => "AVX2",
        _ => "scalar",
    }));
    Console.WriteLine($"accountant_kernel {kernel}");
    Console.WriteLine($"accountant_bootstrap_seconds {whole:F4}");
    Console.WriteLine($"accountant_engine_seconds {engine:F4}");
    // Multiply-adds a dense K×n by n×B product would do; the bit-plane engine does the same sum with popcounts.
    Console.WriteLine($"accountant_equivalent_gflops {2.0 * k * n * b / engine / 1e9:F1}");
    Console.WriteLine($"loss_bytes {(long)k * ((n + 7) / 8)}");
    Console.WriteLine($"best_row {best}");
    Console.WriteLine($"bbc_estimate {result!.BiasCorrection.Estimate:F5}");
    Console.WriteLine($"bbc_upper {result.BiasCorrection.Upper:F5}");
    Console.WriteLine($"max_critical {result.MaxBootstrap.CriticalValue:F4}");
    Console.WriteLine($"observed_best {matrix.ErrorRate(best):F5}");
    return 0;
}

// Ledger ingest: the library's batch API against raw prepared inserts of the same rows in one transaction.
static int Ingest(string[] a)
{
    var folder = a[0];
    Directory.CreateDirectory(folder);
    var scoreOnly = Enumerable.Range(0, 20_000).Select(i => new LookInput
    {
        Configuration = $$"""{"depth":{{i % 12}},"eta":0.{{i % 97:00}},"trainer":"gbm","trees":{{100 + i}}}""",
        Score = (i % 1000) / 1000.0,
    }).ToList();
    const int exampleCount = 100_000;
    var random = new Random(5);
    var bitsetLooks = Enumerable.Range(0, 1_000).Select(i =>
    {
        var bits = new byte[exampleCount / 8];
        random.NextBytes(bits);
        return new LookInput { Configuration = $$"""{"leaves":{{i}},"trainer":"forest"}""", Losses = bits };
    }).ToList();

    var round = 0;
    (double Library, double Raw) Measure(List<LookInput> inputs, int size)
    {
        var examples = Enumerable.Range(0, size).Select(i => new HoldoutExample($"x{i:000000}", (i % 2).ToString(CultureInfo.InvariantCulture))).ToList();
        double Library()
        {
            var path = Path.Combine(folder, $"library-{round++}.db");
            using var book = Bookkeeper.Create(path);
            book.RegisterHoldout("v", examples);
            var seconds = Time(() => book.RecordMany("v", inputs));
            if (book.Store.Looks(book.Holdout("v")).Count != inputs.Count) throw new InvalidOperationException("library ingest lost looks");
            return seconds;
        }

        double Raw()
        {
            // The same rows (configuration, digest, score, losses, entry hashes) prepared beforehand, inserted into a
            // ledger with the same schema, pragmas and triggers, in one transaction with prepared statements.
            var path = Path.Combine(folder, $"raw-{round++}.db");
            using (var book = Bookkeeper.Create(path)) book.RegisterHoldout("v", examples);
            var rows = inputs.Select((input, i) => (Configuration: ConfigurationJson.Canonicalize(input.Configuration), Digest: new string('a', 64),
                Score: input.Score ?? 0.5, Losses: input.Losses, Hash: Guid.NewGuid().ToByteArray().Concat(Guid.NewGuid().ToByteArray()).ToArray())).ToList();
            var recorded = Chain.Timestamp(DateTimeOffset.UtcNow);
            using var connection = new SqliteConnection(new SqliteConnectionStringBuilder { DataSource = path, Pooling = false }.ConnectionString);
            connection.Open();
            using (var pragma = connection.CreateCommand()) { pragma.CommandText = "PRAGMA journal_mode = WAL;"; pragma.ExecuteNonQuery(); }
            return Time(() =>
            {
                using var transaction = connection.BeginTransaction(deferred: false);
                using var entry = connection.CreateCommand();
                entry.CommandText = "INSERT INTO entries (seq, kind, prev_hash, hash) VALUES ($seq, 'look', $prev, $hash);";
                var eSeq = entry.Parameters.Add("$seq", SqliteType.Integer);
                var ePrev = entry.Parameters.Add("$prev", SqliteType.Blob);
                var eHash = entry.Parameters.Add("$hash", SqliteType.Blob);
                entry.Prepare();
                using var look = connection.CreateCommand();
                look.CommandText = """
                    INSERT INTO looks (seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, search, stage, seconds, recorded_at)
                    VALUES ($seq, 1, $number, $configuration, $digest, $score, 0, $encoding, $losses, NULL, NULL, NULL, $recorded);
                    """;
                var lSeq = look.Parameters.Add("$seq", SqliteType.Integer);
                var lNumber = look.Parameters.Add("$number", SqliteType.Integer);
                var lConfiguration = look.Parameters.Add("$configuration", SqliteType.Text);
                var lDigest = look.Parameters.Add("$digest", SqliteType.Text);
                var lScore = look.Parameters.Add("$score", SqliteType.Real);
                var lEncoding = look.Parameters.Add("$encoding", SqliteType.Integer);
                var lLosses = look.Parameters.Add("$losses", SqliteType.Blob);
                var lRecorded = look.Parameters.Add("$recorded", SqliteType.Text);
                look.Prepare();
                var previous = new byte[32];
                for (var i = 0; i < rows.Count; i++)
                {
                    var row = rows[i];
                    eSeq.Value = i + 2; ePrev.Value = previous; eHash.Value = row.Hash;
                    entry.ExecuteNonQuery();
                    lSeq.Value = i + 2; lNumber.Value = i + 1; lConfiguration.Value = row.Configuration; lDigest.Value = row.Digest;
                    lScore.Value = row.Score; lEncoding.Value = row.Losses is null ? 0 : 1; lLosses.Value = (object?)row.Losses ?? DBNull.Value;
                    lRecorded.Value = recorded;
                    look.ExecuteNonQuery();
                    previous = row.Hash;
                }

                transaction.Commit();
            });
        }

        Library();
        Raw();
        var library = new List<double>();
        var raw = new List<double>();
        for (var r = 0; r < 5; r++)
        {
            library.Add(Library());
            raw.Add(Raw());
        }

        return (Median(library), Median(raw));
    }

    var (libraryScores, rawScores) = Measure(scoreOnly, 1000);
    Console.WriteLine($"ingest_score_only_looks {scoreOnly.Count}");
    Console.WriteLine($"ingest_score_only_library_per_second {scoreOnly.Count / libraryScores:F0}");
    Console.WriteLine($"ingest_score_only_raw_per_second {scoreOnly.Count / rawScores:F0}");
    Console.WriteLine($"ingest_score_only_ratio {rawScores / libraryScores:F3}");
    var (libraryBits, rawBits) = Measure(bitsetLooks, exampleCount);
    Console.WriteLine($"ingest_bitset_looks {bitsetLooks.Count}");
    Console.WriteLine($"ingest_bitset_library_per_second {bitsetLooks.Count / libraryBits:F0}");
    Console.WriteLine($"ingest_bitset_raw_per_second {bitsetLooks.Count / rawBits:F0}");
    Console.WriteLine($"ingest_bitset_ratio {rawBits / libraryBits:F3}");
    foreach (var file in Directory.GetFiles(folder)) File.Delete(file);
    return 0;
}

// A ledger of many score-only looks, written through the library in batches: a SQLite file or a PostgreSQL address. The
// looks are the same for the same count (a seeded generator); only their timestamps, and so the chain, differ.
static int LedgerScores(string[] a)
{
    var path = a[0];
    var looks = int.Parse(a[1]);
    if (!LedgerLocation.LooksLikePostgres(path) && File.Exists(path)) File.Delete(path);
    using var book = Bookkeeper.Create(path);
    book.RegisterHoldout("big", Enumerable.Range(0, 10_000).Select(i => new HoldoutExample($"x{i:00000}", (i % 2).ToString(CultureInfo.InvariantCulture))));
    var random = new Random(3);
    for (var done = 0; done < looks; done += 100_000)
    {
        var batch = Enumerable.Range(done, Math.Min(100_000, looks - done)).Select(i => new LookInput
        {
            Configuration = $$"""{"depth":{{i % 12}},"eta":{{random.Next(1, 300)}},"trainer":"gbm","trees":{{i}}}""",
            Score = 0.15 + random.Next(0, 2000) / 10_000.0,
        }).ToList();
        book.RecordMany("big", batch);
    }

    // On PostgreSQL, the state autovacuum leaves a table in shortly after a large write (within its one-minute naptime
    // here): statistics for the planner and the visibility map that lets a count read the index alone. Done here so
    // that a timing does not depend on whether autovacuum has come round yet.
    if (LedgerLocation.LooksLikePostgres(path))
    {
        using var connection = new Npgsql.NpgsqlConnection(LedgerLocation.Parse(path).Postgres!.ConnectionString);
        connection.Open();
        using var vacuum = new Npgsql.NpgsqlCommand("VACUUM (ANALYZE) entries, holdouts, looks, voids;", connection);
        vacuum.ExecuteNonQuery();
        Console.WriteLine("vacuumed and analyzed");
    }

    Console.WriteLine($"ledger {path} looks {looks}");
    return 0;
}

// A ledger of K looks that each carry an n-example loss bitset (correlated configurations), plus a predictions file.
static int LedgerBitsets(string[] a)
{
    var path = a[0];
    int k = int.Parse(a[1]), n = int.Parse(a[2]);
    if (File.Exists(path)) File.Delete(path);
    var random = new Random(4);
    var examples = Enumerable.Range(0, n).Select(i => new HoldoutExample($"x{i:000000}", (i % 2).ToString(CultureInfo.InvariantCulture))).ToList();
    var matrix = CorrelatedLosses.Draw(random, Enumerable.Range(0, k).Select(_ => 0.2 + 0.05 * random.NextDouble()).ToList(), n, 0.9);
    var bytes = (n + 7) / 8;
    using var book = Bookkeeper.Create(path);
    book.RegisterHoldout("wide", examples);
    book.RecordMany("wide", Enumerable.Range(0, k).Select(j =>
    {
        var row = new byte[bytes];
        System.Runtime.InteropServices.MemoryMarshal.AsBytes(matrix.Row(j))[..bytes].CopyTo(row);
        return new LookInput { Configuration = $$"""{"config":{{j}}}""", Losses = row };
    }).ToList());
    // Predictions for one more look, for timing 'accountant record' from a separate process.
    var predictions = Path.ChangeExtension(path, ".predictions.csv");
    File.WriteAllLines(predictions, new[] { "id,prediction" }.Concat(examples.Select((e, i) => $"{e.Id},{(random.NextDouble() < 0.2 ? 1 - i % 2 : i % 2)}")));
    Console.WriteLine($"ledger {path} looks {k} examples {n} predictions {predictions}");
    return 0;
}
