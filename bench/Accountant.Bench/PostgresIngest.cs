using System.Diagnostics;
using System.Globalization;
using Accountant;
using Accountant.Ledger;
using Npgsql;
using NpgsqlTypes;

/// <summary>
/// Looks recorded per second on a PostgreSQL ledger over loopback, through the library, against raw Npgsql writes of
/// the same rows (precomputed digests and hashes) into a ledger with the same tables and triggers: prepared INSERTs in
/// one transaction (the plain way), binary COPY (the fastest way Npgsql has), and, for single looks, one transaction
/// per look as a worker of a shared search writes them. Each schema is fresh; medians of three rounds.
/// </summary>
internal static class PostgresIngest
{
    public static int Run(string[] a)
    {
        var server = a[0];
        var scoreOnly = Enumerable.Range(0, 20_000).Select(i => new LookInput
        {
            Configuration = $$"""{"depth":{{i % 12}},"eta":0.{{i % 97:00}},"trainer":"gbm","trees":{{100 + i}}}""",
            Score = (i % 1000) / 1000.0,
        }).ToList();
        var random = new Random(5);
        var bitsets = Enumerable.Range(0, 1_000).Select(i =>
        {
            var bits = new byte[100_000 / 8];
            random.NextBytes(bits);
            return new LookInput { Configuration = $$"""{"leaves":{{i}},"trainer":"forest"}""", Losses = bits };
        }).ToList();

        Measure(server, "pg_score_only", scoreOnly, 1000, batch: true);
        Measure(server, "pg_bitset", bitsets, 100_000, batch: true);
        Measure(server, "pg_single", scoreOnly.Take(500).ToList(), 1000, batch: false);
        return 0;
    }

    private static void Measure(string server, string name, List<LookInput> inputs, int size, bool batch)
    {
        var examples = Enumerable.Range(0, size).Select(i => new HoldoutExample($"x{i:000000}", (i % 2).ToString(CultureInfo.InvariantCulture))).ToList();
        var library = new List<double>();
        var insert = new List<double>();
        var copy = new List<double>();
        for (var round = 0; round < 4; round++)
        {
            library.Add(WithSchema(server, location =>
            {
                using var book = Bookkeeper.Create(location);
                book.RegisterHoldout("v", examples);
                var watch = Stopwatch.StartNew();
                if (batch) book.RecordMany("v", inputs);
                else foreach (var input in inputs) book.RecordMany("v", [input]);
                watch.Stop();
                if (book.Store.Looks(book.Holdout("v")).Count != inputs.Count) throw new InvalidOperationException("library ingest lost looks");
                return watch.Elapsed.TotalSeconds;
            }));
            insert.Add(WithSchema(server, location => Raw(location, examples, inputs, batch ? Mode.InsertBatch : Mode.InsertEach)));
            if (batch) copy.Add(WithSchema(server, location => Raw(location, examples, inputs, Mode.Copy)));
        }

        // The first round warms up the JIT and the server's caches.
        double Median(List<double> v) => v.Skip(1).Order().ElementAt(1);
        var (l, i) = (Median(library), Median(insert));
        Console.WriteLine($"{name}_looks {inputs.Count}");
        Console.WriteLine($"{name}_library_looks_per_s {inputs.Count / l:0}");
        Console.WriteLine($"{name}_raw_insert_looks_per_s {inputs.Count / i:0}");
        Console.WriteLine($"{name}_ratio_vs_insert {i / l:0.000}");
        if (batch)
        {
            var c = Median(copy);
            Console.WriteLine($"{name}_raw_copy_looks_per_s {inputs.Count / c:0}");
            Console.WriteLine($"{name}_ratio_vs_copy {c / l:0.000}");
        }
    }

    private enum Mode { InsertBatch, InsertEach, Copy }

    private static double Raw(string location, List<HoldoutExample> examples, List<LookInput> inputs, Mode mode)
    {
        using (var book = Bookkeeper.Create(location)) book.RegisterHoldout("v", examples);
        var rows = inputs.Select(input => (Configuration: ConfigurationJson.Canonicalize(input.Configuration), Digest: new string('a', 64),
            Score: input.Score ?? 0.5, input.Losses, Hash: Guid.NewGuid().ToByteArray().Concat(Guid.NewGuid().ToByteArray()).ToArray())).ToList();
        var recorded = Chain.Timestamp(DateTimeOffset.UtcNow);
        using var connection = new NpgsqlConnection(LedgerLocation.Parse(location).Postgres!.ConnectionString);
        connection.Open();
        var watch = Stopwatch.StartNew();
        if (mode == Mode.Copy)
        {
            using var transaction = connection.BeginTransaction();
            using (var writer = connection.BeginBinaryImport("COPY entries (seq, kind, prev_hash, hash) FROM STDIN (FORMAT BINARY);"))
            {
                var previous = new byte[32];
                for (var i = 0; i < rows.Count; i++)
                {
                    writer.StartRow();
                    writer.Write((long)i + 2, NpgsqlDbType.Bigint);
                    writer.Write("look", NpgsqlDbType.Text);
                    writer.Write(previous, NpgsqlDbType.Bytea);
                    writer.Write(rows[i].Hash, NpgsqlDbType.Bytea);
                    previous = rows[i].Hash;
                }

                writer.Complete();
            }

            using (var writer = connection.BeginBinaryImport("COPY looks (seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, recorded_at) FROM STDIN (FORMAT BINARY);"))
            {
                for (var i = 0; i < rows.Count; i++)
                {
                    var row = rows[i];
                    writer.StartRow();
                    writer.Write((long)i + 2, NpgsqlDbType.Bigint);
                    writer.Write(1L, NpgsqlDbType.Bigint);
                    writer.Write(i + 1, NpgsqlDbType.Integer);
                    writer.Write(row.Configuration, NpgsqlDbType.Text);
                    writer.Write(row.Digest, NpgsqlDbType.Text);
                    writer.Write(row.Score, NpgsqlDbType.Double);
                    writer.Write(0, NpgsqlDbType.Integer);
                    writer.Write(row.Losses is null ? 0 : 1, NpgsqlDbType.Integer);
                    if (row.Losses is null) writer.WriteNull(); else writer.Write(row.Losses, NpgsqlDbType.Bytea);
                    writer.Write(recorded, NpgsqlDbType.Text);
                }

                writer.Complete();
            }

            transaction.Commit();
        }
        else
        {
            using var entry = new NpgsqlCommand("INSERT INTO entries (seq, kind, prev_hash, hash) VALUES (@seq, 'look', @prev, @hash);", connection);
            var eSeq = entry.Parameters.Add("seq", NpgsqlDbType.Bigint);
            var ePrev = entry.Parameters.Add("prev", NpgsqlDbType.Bytea);
            var eHash = entry.Parameters.Add("hash", NpgsqlDbType.Bytea);
            using var look = new NpgsqlCommand("""
                INSERT INTO looks (seq, holdout_id, number, configuration, configuration_digest, score, adaptive, loss_encoding, losses, recorded_at)
                VALUES (@seq, 1, @number, @configuration, @digest, @score, 0, @encoding, @losses, @recorded);
                """, connection);
            var lSeq = look.Parameters.Add("seq", NpgsqlDbType.Bigint);
            var lNumber = look.Parameters.Add("number", NpgsqlDbType.Integer);
            var lConfiguration = look.Parameters.Add("configuration", NpgsqlDbType.Text);
            var lDigest = look.Parameters.Add("digest", NpgsqlDbType.Text);
            var lScore = look.Parameters.Add("score", NpgsqlDbType.Double);
            var lEncoding = look.Parameters.Add("encoding", NpgsqlDbType.Integer);
            var lLosses = look.Parameters.Add("losses", NpgsqlDbType.Bytea);
            var lRecorded = look.Parameters.Add("recorded", NpgsqlDbType.Text);
            var transaction = mode == Mode.InsertBatch ? connection.BeginTransaction() : null;
            var previous = new byte[32];
            for (var i = 0; i < rows.Count; i++)
            {
                var row = rows[i];
                var each = mode == Mode.InsertEach ? connection.BeginTransaction() : null;
                eSeq.Value = (long)i + 2; ePrev.Value = previous; eHash.Value = row.Hash;
                entry.ExecuteNonQuery();
                lSeq.Value = (long)i + 2; lNumber.Value = i + 1; lConfiguration.Value = row.Configuration; lDigest.Value = row.Digest;
                lScore.Value = row.Score; lEncoding.Value = row.Losses is null ? 0 : 1; lLosses.Value = (object?)row.Losses ?? DBNull.Value;
                lRecorded.Value = recorded;
                look.ExecuteNonQuery();
                each?.Commit();
                each?.Dispose();
                previous = row.Hash;
            }

            transaction?.Commit();
            transaction?.Dispose();
        }

        watch.Stop();
        return watch.Elapsed.TotalSeconds;
    }

    private static double WithSchema(string server, Func<string, double> body)
    {
        var schema = "bench_" + Guid.NewGuid().ToString("N")[..12];
        var location = new NpgsqlConnectionStringBuilder(server) { SearchPath = schema }.ConnectionString;
        try
        {
            return body(location);
        }
        finally
        {
            using var connection = new NpgsqlConnection(server);
            connection.Open();
            using var drop = new NpgsqlCommand($"DROP SCHEMA IF EXISTS {schema} CASCADE;", connection);
            drop.ExecuteNonQuery();
        }
    }
}
