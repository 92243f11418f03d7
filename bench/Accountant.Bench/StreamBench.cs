using System.Diagnostics;
using System.Globalization;
using System.Text;
using Accountant;
using Accountant.Search;
using Microsoft.ML;
using Microsoft.ML.Data;

/// <summary>
/// The streaming search benchmark (bench/stream.sh): an invented CSV of a given size, ML.NET's text loader reading it alone,
/// and a search on it (two passes, split, featurize, one look), each in a process of its own so that each one's peak
/// memory is its own. Lines "name value" as the rest of the harness prints them.
/// </summary>
internal static class StreamBench
{
    private const string Header = "x1,x2,x3,x4,x5,x6,weekday,shop,label";
    private static readonly string[] Weekdays = ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"];

    /// <summary>
    /// Writes invented rows until the file holds <c>MB</c> megabytes: six numbers, a weekday, a shop of 10,000 and a yes/no
    /// label drawn from a logistic rule of x1, x2, the weekday and the shop. Made by code; nothing real.
    /// </summary>
    public static int Generate(string[] a)
    {
        var (path, bytes, seed) = (a[0], long.Parse(a[1], CultureInfo.InvariantCulture) << 20, int.Parse(a[2], CultureInfo.InvariantCulture));
        var random = new Random(seed);
        var shopEffect = Enumerable.Range(0, 10_000).Select(_ => random.NextDouble() < 0.5 ? -1.0 : 1.0).ToArray();
        using var writer = new StreamWriter(path, false, new UTF8Encoding(false), 1 << 20);
        writer.Write(Header + "\n");
        var line = new StringBuilder(96);
        long written = Header.Length + 1, rows = 0;
        var x = new double[6];
        while (written < bytes)
        {
            line.Clear();
            for (var i = 0; i < 6; i++)
            {
                x[i] = Math.Round(random.NextDouble(), 4);
                line.Append(x[i].ToString("0.0###", CultureInfo.InvariantCulture)).Append(',');
            }

            var day = random.Next(7);
            var shop = random.Next(10_000);
            var logit = 3 * (x[0] - 0.5) + 2 * (x[1] - 0.5) + (day >= 5 ? 0.8 : -0.3) + shopEffect[shop];
            var label = random.NextDouble() < 1 / (1 + Math.Exp(-logit));
            line.Append(Weekdays[day]).Append(",s").Append(shop.ToString(CultureInfo.InvariantCulture)).Append(',').Append(label ? "yes" : "no").Append('\n');
            writer.Write(line);
            written += line.Length;
            rows++;
        }

        Console.WriteLine($"rows {rows}");
        Console.WriteLine($"bytes {written}");
        return 0;
    }

    /// <summary>ML.NET's text loader reading every column of every row, as a search's data would be read.</summary>
    public static int MlNet(string[] a)
    {
        var ml = new MLContext(1);
        var watch = Stopwatch.StartNew();
        var columns = Enumerable.Range(0, 6).Select(i => new TextLoader.Column($"x{i + 1}", DataKind.Single, i))
            .Concat([new TextLoader.Column("weekday", DataKind.String, 6), new TextLoader.Column("shop", DataKind.String, 7), new TextLoader.Column("label", DataKind.String, 8)]).ToArray();
        var view = ml.Data.LoadFromTextFile(a[0], columns, separatorChar: ',', hasHeader: true);
        long rows = 0;
        double sum = 0;
        using (var cursor = view.GetRowCursor(view.Schema))
        {
            var numbers = Enumerable.Range(0, 6).Select(i => cursor.GetGetter<float>(view.Schema[i])).ToArray();
            var texts = Enumerable.Range(6, 3).Select(i => cursor.GetGetter<ReadOnlyMemory<char>>(view.Schema[i])).ToArray();
            float value = 0;
            ReadOnlyMemory<char> text = default;
            while (cursor.MoveNext())
            {
                rows++;
                foreach (var get in numbers)
                {
                    get(ref value);
                    sum += value;
                }

                foreach (var get in texts)
                {
                    get(ref text);
                    sum += text.Length;
                }
            }
        }

        Console.WriteLine($"mlnet_rows {rows}");
        Console.WriteLine($"mlnet_seconds {watch.Elapsed.TotalSeconds:F2}");
        Console.WriteLine($"mlnet_checksum {sum:G6}");
        Console.WriteLine($"mlnet_vmhwm_kb {PeakKb()}");
        return 0;
    }

    /// <summary>A search of one look on the file (the one configuration in SPACE), with where its time went.</summary>
    public static int Search(string[] a)
    {
        var (path, ledger, space) = (a[0], a[1], a[2]);
        using var book = Bookkeeper.Create(ledger);
        var search = new TabularSearch(book, ledger);
        var outcome = search.Run(new TabularSearchOptions { DataPath = path, Label = "label", Task = Accountant.Search.Data.TaskKind.Binary, Looks = 1, Seed = 1, SpacePath = space },
            new Progress(), note => Console.Error.WriteLine("accountant: " + note));
        var t = search.Timings;
        string S(TimeSpan x, string format = "F2") => x.TotalSeconds.ToString(format, CultureInfo.InvariantCulture);
        foreach (var (name, value) in new[]
        {
            ("rows", $"{outcome.TrainingRows + outcome.ValidationRows + outcome.TestRows + outcome.LeftOut}"),
            ("parts", $"{outcome.TrainingRows} {outcome.ValidationRows} {outcome.TestRows} {outcome.LeftOut}"),
            ("seconds", S(t.Total)), ("reading_seconds", S(t.Reading)), ("featurizing_seconds", S(t.Featurizing)),
            ("training_seconds", S(t.Training)), ("accounting_seconds", S(t.Accounting, "F3")), ("saving_seconds", S(t.Saving)),
            ("accounting_share", (t.Accounting.TotalSeconds / t.Total.TotalSeconds).ToString("F4", CultureInfo.InvariantCulture)),
            ("best_error", outcome.Statement.Best!.Score.ToString("F4", CultureInfo.InvariantCulture)), ("vmhwm_kb", $"{PeakKb()}"),
        })
        {
            Console.WriteLine($"search_{name} {value}");
        }

        return 0;
    }

    private static long PeakKb() =>
        File.ReadLines("/proc/self/status").Where(l => l.StartsWith("VmHWM:", StringComparison.Ordinal))
            .Select(l => long.Parse(l.Split(' ', StringSplitOptions.RemoveEmptyEntries)[1], CultureInfo.InvariantCulture)).FirstOrDefault();

    /// <summary>Progress on stderr at every tenth of each pass, so a run of minutes shows it is moving.</summary>
    private sealed class Progress : IProgress<SearchProgress>
    {
        private string? _last;

        public void Report(SearchProgress p)
        {
            var step = p.Reading is { } r ? $"{p.Current} {(int)(r * 10) * 10}%" : $"{p.Done}/{p.Total} looks {p.Current}";
            if (step == _last) return;
            _last = step;
            Console.Error.WriteLine($"  {p.Elapsed:mm\\:ss} {step}");
        }
    }
}
