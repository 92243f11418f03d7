using System.Globalization;
using Accountant.Cli;

CultureInfo.DefaultThreadCurrentCulture = CultureInfo.InvariantCulture;
CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
using var cancel = new CancellationTokenSource();
Console.CancelKeyPress += (_, e) =>
{
    // While a search runs, the first Ctrl-C asks it to stop after the look in progress; a second one ends the process.
    if (CtrlC.Observed && !cancel.IsCancellationRequested)
    {
        e.Cancel = true;
        cancel.Cancel();
    }
};
return AccountantCli.Run(args, CliEnvironment.FromConsole(cancel.Token));
