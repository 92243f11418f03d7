using System.Globalization;
using Accountant.Cli;

CultureInfo.DefaultThreadCurrentCulture = CultureInfo.InvariantCulture;
CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
using var cancel = new CancellationTokenSource();
Console.CancelKeyPress += (_, e) =>
{
    // The first Ctrl-C asks the running command to stop after the look in progress; a second one ends the process.
    if (!cancel.IsCancellationRequested)
    {
        e.Cancel = true;
        cancel.Cancel();
    }
};
return AccountantCli.Run(args, CliEnvironment.FromConsole(cancel.Token));
