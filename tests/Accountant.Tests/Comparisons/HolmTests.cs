using Accountant.Comparisons;

namespace Accountant.Tests.Comparisons;

public class HolmTests
{
    [Fact]
    public void Adjusted_values_match_the_worked_example()
    {
        // Holm 1979, Scand. J. Stat. 6:65; arithmetic (DESIGN.md): sorted 0.005·4 = 0.02, 0.01·3 = 0.03, 0.03·2 = 0.06,
        // 0.04·1 = 0.04 raised to the running maximum 0.06.
        var adjusted = Holm.Adjust([0.01, 0.04, 0.03, 0.005]);
        Assert.Equal([0.03, 0.06, 0.06, 0.02], adjusted.Select(p => Math.Round(p, 12)));
    }

    [Fact]
    public void Adjusted_values_never_exceed_one_and_never_fall_below_the_raw_values()
    {
        var raw = new[] { 0.5, 0.9, 0.2, 0.0, 1.0 };
        var adjusted = Holm.Adjust(raw);
        for (var i = 0; i < raw.Length; i++)
        {
            Assert.InRange(adjusted[i], raw[i], 1.0);
        }

        Assert.Equal(0.0, adjusted[3]);
        Assert.Equal(1.0, adjusted[1]);
    }
}
