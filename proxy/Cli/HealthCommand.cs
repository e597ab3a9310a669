using System.CommandLine;

namespace RewriteProxy.Cli;

/// <summary><c>rewriteproxy health</c>: exits 0 when the URL answers 200; for container health checks that have no curl.</summary>
public static class HealthCommand
{
    // A string, checked here: System.CommandLine 2.0.0 cannot bind a Uri option.
    static readonly Option<string> Url = new("--url")
    {
        Description = "Health endpoint to ask.",
        DefaultValueFactory = _ => "http://127.0.0.1:8080/healthz",
    };

    public static Command Create()
    {
        var command = new Command("health", "Ask a running proxy's health endpoint; exit 0 when it answers 200.") { Url };
        command.SetAction(async (parse, cancel) =>
        {
            var text = parse.GetValue(Url)!;
            if (!Uri.TryCreate(text, UriKind.Absolute, out var url) || (url.Scheme != "http" && url.Scheme != "https"))
            {
                Console.Error.WriteLine($"rewriteproxy: health: --url '{text}' is not an absolute http(s) URL");
                return ExitCodes.BadConfiguration;
            }
            using var http = new HttpClient { Timeout = TimeSpan.FromSeconds(4) };
            try
            {
                using var response = await http.GetAsync(url, cancel);
                if (response.IsSuccessStatusCode) return ExitCodes.Ok;
                Console.Error.WriteLine($"rewriteproxy: health: {(int)response.StatusCode}");
            }
            catch (Exception e) when (e is HttpRequestException or TaskCanceledException)
            {
                Console.Error.WriteLine($"rewriteproxy: health: {e.Message}");
            }
            return ExitCodes.Failed;
        });
        return command;
    }
}
