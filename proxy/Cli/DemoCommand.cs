using System.CommandLine;
using Microsoft.Extensions.Configuration;
using RewriteProxy.Cli.Demo;
using RewriteProxy.Hosting;
using Spectre.Console;

namespace RewriteProxy.Cli;

/// <summary>
/// <c>rewriteproxy demo</c>: the proxy on its shipped defaults in front of a scripted upstream, a workload through both
/// lanes, and the counts checked against /metrics and the store. No network, no provider key.
/// </summary>
public static class DemoCommand
{
    static readonly Option<int> Seed = new("--seed")
    {
        Description = "Seed of the workload and of the scripted upstream's answers and delays; the same seed plays the same run.",
        DefaultValueFactory = _ => DemoSettings.DefaultSeed,
    };

    static readonly Option<int> Calls = new("--calls")
    {
        Description = "Lane calls to play, split between the draft and siblings lanes.",
        DefaultValueFactory = _ => DemoSettings.DefaultCalls,
    };

    static readonly Option<bool> Keep = new("--keep") { Description = "Keep the temporary store and print its path." };

    static readonly Option<string> Out = new("--out")
    {
        Description = "Folder for the run's summary and tuning report.",
        DefaultValueFactory = _ => DemoSettings.DefaultOut,
    };

    /// <summary>Calls in one progress line when the output is not a terminal.</summary>
    const int PlainProgressSteps = 10;

    public static Command Create()
    {
        var command = new Command("demo",
            "Run the proxy on its defaults against a scripted stand-in upstream and show what the cache and the drift guard do.")
        {
            Seed, Calls, Keep, Out,
        };
        command.TreatUnmatchedTokensAsErrors = false;
        command.SetAction(RunAsync);
        return command;
    }

    static async Task<int> RunAsync(ParseResult parse, CancellationToken cancel)
    {
        IConfigurationRoot configuration;
        try
        {
            configuration = ConfigurationLoader.Load(parse.GetValue(Startup.ConfigFile), parse.UnmatchedTokens);
        }
        catch (ConfigurationFileException e)
        {
            Console.Error.WriteLine($"rewriteproxy: config: {e.Message}");
            return ExitCodes.BadConfiguration;
        }
        if (parse.GetValue(Calls) < DemoWorkload.Lanes.Length)
        {
            Console.Error.WriteLine($"rewriteproxy: demo: --calls must be at least {DemoWorkload.Lanes.Length} (one per lane)");
            return ExitCodes.BadConfiguration;
        }
        var settings = new DemoSettings
        {
            Seed = parse.GetValue(Seed),
            Calls = parse.GetValue(Calls),
            Keep = parse.GetValue(Keep),
            OutDirectory = parse.GetValue(Out),
        };
        var console = AnsiConsole.Console;
        DemoPrinter.Introduce(console, settings);
        DemoResult result;
        try
        {
            result = console.Profile.Capabilities.Interactive && !Console.IsOutputRedirected
                ? await RunWithBarAsync(console, settings, configuration, cancel)
                : await DemoRunner.RunAsync(settings, configuration, PlainProgress(console), cancel: cancel);
        }
        catch (DemoException e)
        {
            Console.Error.WriteLine($"rewriteproxy: demo: {e.Message}");
            return ExitCodes.BadConfiguration;
        }
        DemoPrinter.Results(console, result);
        DemoPrinter.Conclude(console, result);
        return result.Succeeded ? ExitCodes.Ok : ExitCodes.Failed;
    }

    static Task<DemoResult> RunWithBarAsync(IAnsiConsole console, DemoSettings settings, IConfiguration configuration,
        CancellationToken cancel) =>
        console.Progress()
            .Columns(new TaskDescriptionColumn(), new ProgressBarColumn(), new PercentageColumn(), new ElapsedTimeColumn())
            .StartAsync(async context =>
            {
                var task = context.AddTask("lane calls", maxValue: settings.Calls);
                return await DemoRunner.RunAsync(settings, configuration, (done, total) =>
                {
                    task.MaxValue = total;
                    task.Value = done;
                }, cancel: cancel);
            });

    /// <summary>One line per tenth of the run, for logs and pipes where a bar would be noise.</summary>
    static Action<int, int> PlainProgress(IAnsiConsole console)
    {
        var gate = new object();
        var printed = -1;
        return (done, total) =>
        {
            var step = total == 0 ? PlainProgressSteps : done * PlainProgressSteps / total;
            lock (gate)
            {
                if (step <= printed) return;
                printed = step;
                console.WriteLine($"  {done}/{total} calls");
            }
        };
    }
}
