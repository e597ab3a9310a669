using System.Diagnostics;
using System.Text.Json.Nodes;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>
/// Runs a script of tests/clients with the Node.js and the npm packages pinned there (scripts/test.sh installs them):
/// the official provider clients and frameworks, used as the proxy's clients. A script takes one JSON spec and prints
/// one JSON line of results.
/// </summary>
public static class NodeClients
{
    static string Folder => Path.Combine(RepositoryRoot.File("tests", "clients"));

    /// <summary>The package.json version of an installed package, to name beside a check.</summary>
    public static string VersionOf(string package) =>
        JsonNode.Parse(File.ReadAllText(Path.Combine(Folder, "node_modules", package, "package.json")))!["version"]!.GetValue<string>();

    public static async Task<JsonArray> RunAsync(string script, JsonObject spec, TimeSpan? timeout = null)
    {
        var node = Path.Combine(Folder, "node_modules", ".bin", "node");
        if (!File.Exists(node))
            throw new InvalidOperationException($"{node} is missing: run scripts/test.sh, or `npm ci` in {Folder}.");
        var start = new ProcessStartInfo(node)
        {
            WorkingDirectory = Folder,
            RedirectStandardOutput = true,
            RedirectStandardError = true,
            UseShellExecute = false,
        };
        start.ArgumentList.Add(script);
        start.ArgumentList.Add(spec.ToJsonString());
        // No proxy or key from the machine's environment may reach the clients.
        foreach (var name in new[] { "OPENAI_API_KEY", "OPENAI_BASE_URL", "ANTHROPIC_API_KEY", "ANTHROPIC_BASE_URL", "AZURE_OPENAI_API_KEY",
                     "AZURE_OPENAI_ENDPOINT", "OPENAI_API_VERSION", "HTTP_PROXY", "HTTPS_PROXY", "http_proxy", "https_proxy" })
            start.Environment.Remove(name);
        start.Environment["NO_PROXY"] = "127.0.0.1,localhost";
        using var process = Process.Start(start)!;
        var stdout = process.StandardOutput.ReadToEndAsync();
        var stderr = process.StandardError.ReadToEndAsync();
        using var cancel = new CancellationTokenSource(timeout ?? TimeSpan.FromSeconds(90));
        try
        {
            await process.WaitForExitAsync(cancel.Token);
        }
        catch (OperationCanceledException)
        {
            process.Kill(entireProcessTree: true);
            throw new TimeoutException($"{script} did not finish: {await stderr}");
        }
        var output = (await stdout).Trim();
        if (process.ExitCode != 0 || output.Length == 0)
            throw new InvalidOperationException($"{script} exited {process.ExitCode}: {await stderr}");
        return JsonNode.Parse(output.Split('\n')[^1])!.AsArray();
    }
}
