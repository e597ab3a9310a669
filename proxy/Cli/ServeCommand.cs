using System.CommandLine;
using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.Configuration;
using RewriteProxy.Hosting;

namespace RewriteProxy.Cli;

/// <summary><c>rewriteproxy serve</c>: runs the proxy until Ctrl+C or SIGTERM.</summary>
public static class ServeCommand
{
    public static readonly Option<string?> Urls = new("--urls")
    {
        Description = $"Where to listen, ';'-separated (default {ProxyApp.DefaultUrls}; use http://0.0.0.0:8080 in a container).",
    };

    public static Command Create()
    {
        var command = new Command("serve", "Run the proxy (the default command).") { Urls };
        command.TreatUnmatchedTokensAsErrors = false;
        command.SetAction(RunAsync);
        return command;
    }

    public static async Task<int> RunAsync(ParseResult parse, CancellationToken cancel)
    {
        if (!Startup.TryLoad(parse, out var options, out var configuration)) return ExitCodes.BadConfiguration;
        var urls = parse.GetValue(Urls) ?? configuration["Urls"] ?? ProxyApp.DefaultUrls;
        WebApplication app;
        try
        {
            app = ProxyApp.Build(options, configuration, urls);
        }
        catch (StartupException e)
        {
            Console.Error.WriteLine($"rewriteproxy: {e.Message}");
            return ExitCodes.BadConfiguration;
        }
        await using (app)
        {
            try
            {
                await app.StartAsync(cancel);
            }
            catch (IOException e)
            {
                Console.Error.WriteLine($"rewriteproxy: cannot listen on {urls}: {e.Message}");
                return ExitCodes.CannotListen;
            }
            await app.WaitForShutdownAsync(cancel);
        }
        return ExitCodes.Ok;
    }
}

public static class ExitCodes
{
    public const int Ok = 0;
    public const int Failed = 1;
    public const int BadConfiguration = 2;
    public const int CannotListen = 3;
}
