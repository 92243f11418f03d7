using System.Globalization;
using System.Text;
using Accountant.Search.Demo;

namespace Accountant.Search.Tests;

/// <summary>The invented bakery scenario as CSV (data made by code), sorted by the label as real files often are.</summary>
internal static class BakeryFile
{
    public static string Write(string folder, int rows, int seed = 3, string name = "bakery.csv")
    {
        var days = BakeryScenario.Generate(rows, seed).OrderBy(d => d.Label).ToList();
        var text = new StringBuilder("day,weekday,temperature,rain,event,loaves,price,hours,sold_out\n");
        foreach (var d in days)
        {
            text.Append(CultureInfo.InvariantCulture, $"{d.Id},{d.Weekday},{d.Temperature},{d.Rain},{d.StreetEvent},{d.Loaves},{d.Price},{d.HoursOpen},{(d.Label ? "yes" : "no")}\n");
        }

        var path = Path.Combine(folder, name);
        File.WriteAllText(path, text.ToString());
        return path;
    }
}
