namespace Accountant.Cli;

/// <summary>What a command may touch outside itself: its writers, the environment, the clock, and Ctrl-C.</summary>
public sealed record CliEnvironment(TextWriter Output, TextWriter Error, Func<string, string?> Variable)
{
    /// <summary>Whether stderr is a terminal (progress bars redraw in place only then).</summary>
    public bool ErrorIsTerminal { get; init; }

    public TimeProvider Clock { get; init; } = TimeProvider.System;

    /// <summary>Cancelled on Ctrl-C when the process hooks it; tests cancel it themselves.</summary>
    public CancellationToken Cancel { get; init; }

    public static CliEnvironment FromConsole(CancellationToken cancel) =>
        new(Console.Out, Console.Error, Environment.GetEnvironmentVariable)
        {
            ErrorIsTerminal = !Console.IsErrorRedirected,
            Cancel = cancel,
        };
}
