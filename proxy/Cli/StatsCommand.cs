using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.Extensions.Logging.Abstractions;
using RewriteProxy.Admin;
using RewriteProxy.Cache;
using RewriteProxy.Cli.Reports;
using Spectre.Console;

namespace RewriteProxy.Cli;

/// <summary>
/// <c>rewriteproxy stats</c>: per lane entries, hits, hit ratio, tokens saved, drops and refusals by reason, and the
/// store size; from a store file or from a running proxy's <c>GET /admin/stats</c>. Both print the same JSON with --json.
/// </summary>
public static class StatsCommand
{
    static readonly StatsTarget.Options Target = new();
    static readonly Option<bool> Json = new("--json") { Description = "Print the JSON of GET /admin/stats instead of tables." };

    public static Command Create()
    {
        var command = new Command("stats", "Show per-lane cache figures of a store file or a running proxy.") { Json };
        Target.AddTo(command);
        command.TreatUnmatchedTokensAsErrors = false;
        command.SetAction(async (parse, cancel) =>
        {
            if (Target.Resolve(parse, "stats") is not { } target) return ExitCodes.BadConfiguration;
            return await RunAsync(target, parse.GetValue(Json), AnsiConsole.Console, Console.Out, cancel);
        });
        return command;
    }

    public static async Task<int> RunAsync(StatsTarget target, bool json, IAnsiConsole console, TextWriter stdout, CancellationToken cancel)
    {
        JsonNode body;
        try
        {
            body = await ReadAsync(target, cancel);
        }
        catch (Exception e) when (e is StoreException or AdminCallException)
        {
            Console.Error.WriteLine($"rewriteproxy: stats: {e.Message}");
            return ExitCodes.Failed;
        }
        if (json)
        {
            await stdout.WriteLineAsync(body.ToJsonString(new JsonSerializerOptions { WriteIndented = true }));
            return ExitCodes.Ok;
        }
        foreach (var table in Tables(body)) console.Write(table.ToConsole());
        console.WriteLine($"store size: {Size(body["storeBytes"]?.GetValue<long>() ?? 0)} ({(target.Url is null ? target.StorePath : target.Url)})");
        return ExitCodes.Ok;
    }

    /// <summary>The stats as the admin API shapes them, read from the file (read only) or over HTTP.</summary>
    public static async Task<JsonNode> ReadAsync(StatsTarget target, CancellationToken cancel)
    {
        if (target.Url is not null)
        {
            using var client = new AdminClient(target.AdminRoot, target.Token!);
            return await client.StatsAsync(cancel);
        }
        var path = target.StorePath!;
        if (!File.Exists(path)) throw new StoreException($"{path}: no store file there (use --store or Store:Path)");
        var store = new SqliteRewriteStore(new StoreOptions { Path = path }, new EventsOptions(), NullLogger.Instance);
        var stats = store.Stats();
        // The same serialiser settings as the admin endpoint's Results.Json, so both sources print the same JSON.
        return JsonSerializer.SerializeToNode(AdminEndpoints.StatsBody(stats), new JsonSerializerOptions(JsonSerializerDefaults.Web))!;
    }

    /// <summary>Lane figures and drops/refusals by reason as two tables, each narrow enough for 80 columns.</summary>
    public static IReadOnlyList<ReportTable> Tables(JsonNode body)
    {
        var lanes = new ReportTable("lanes", "lane", "entries", "hits", "misses", "hit ratio", "tokens saved");
        var reasons = new ReportTable("drops and refusals", "lane", "what", "reason", "count");
        foreach (var lane in body["lanes"]?.AsArray() ?? [])
        {
            var name = lane!["lane"]!.GetValue<string>();
            long N(string key) => lane[key]?.GetValue<long>() ?? 0;
            var ratio = lane["hitRatio"]?.GetValue<double>();
            lanes.Add(name, Count(N("entries")), Count(N("hitExact") + N("hitSemantic")), Count(N("miss")),
                ratio is { } r ? r.ToString("0.0%", CultureInfo.InvariantCulture) : "—", Count(N("tokensSaved")));
            foreach (var (what, key) in new[] { ("dropped", "dropsByReason"), ("refused", "refusalsByReason") })
                foreach (var (reason, n) in lane[key]?.AsObject() ?? [])
                    reasons.Add(name, what, reason, Count(n!.GetValue<long>()));
        }
        return reasons.Rows.Count > 0 ? [lanes, reasons] : [lanes];
    }

    static string Count(long n) => n.ToString("N0", CultureInfo.InvariantCulture);

    static string Size(long bytes) => bytes switch
    {
        < 1024 => $"{bytes} B",
        < 1 << 20 => (bytes / 1024.0).ToString("0.0", CultureInfo.InvariantCulture) + " KiB",
        _ => (bytes / 1048576.0).ToString("0.0", CultureInfo.InvariantCulture) + " MiB",
    };
}
