using System.Globalization;
using Accountant;

// Usage: accountant-load-writer LEDGER HOLDOUT WRITER COUNT
// Records COUNT looks through the library, one transaction each, on one open ledger, and prints
// "ack NUMBER CONFIGURATION" after each acknowledged look, so the test can check every one of them.
if (args.Length != 4)
{
    Console.Error.WriteLine("usage: accountant-load-writer LEDGER HOLDOUT WRITER COUNT");
    return 2;
}

var writer = int.Parse(args[2], CultureInfo.InvariantCulture);
var count = int.Parse(args[3], CultureInfo.InvariantCulture);
try
{
    using var book = Bookkeeper.Open(args[0]);
    for (var i = 0; i < count; i++)
    {
        var configuration = $"{{\"writer\":{writer},\"i\":{i}}}";
        var look = book.Record(args[1], configuration, ((writer * 1000 + i) % 997) / 1000.0);
        Console.Out.WriteLine($"ack {look.Number.ToString(CultureInfo.InvariantCulture)} {look.Configuration}");
        Console.Out.Flush();
    }

    return 0;
}
catch (AccountantException e)
{
    Console.Error.WriteLine($"accountant-load-writer: {e.Message}");
    return 5;
}
