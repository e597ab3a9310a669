using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using RewriteProxy.Admin;
using RewriteProxy.Cli.Reports;
using RewriteProxy.Store;
using Spectre.Console;

namespace RewriteProxy.Cli;

/// <summary>
/// <c>rewriteproxy stats</c>: per lane entries, hits, hit ratio, tokens saved, drops and refusals by reason, and the
/// store size; from the store or from a running proxy's <c>GET /admin/stats</c>. Both print the same JSON with --json.
/// </summary>
public static class StatsCommand
{
    static readonly StatsTarget.Options Target = new();
    static readonly Option<bool> Json = new("--json") { Description = "Print the JSON of GET /admin/stats instead of tables." };

    public static Command Create()
    {
        var command = new Command("stats", "Show per-lane cache figures of the store or a running proxy.") { Json };
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
        console.WriteLine($"store size: {Size(body["storeBytes"]?.GetValue<long>() ?? 0)} ({target.Describe()})");
        return ExitCodes.Ok;
    }

    /// <summary>The stats as the admin API shapes them, read from the store (read only) or over HTTP.</summary>
    public static async Task<JsonNode> ReadAsync(StatsTarget target, CancellationToken cancel)
    {
        if (target.Url is not null)
        {
            using var client = new AdminClient(target.AdminRoot, target.Token!);
            return await client.StatsAsync(cancel);
        }
        await using var store = await CliStore.OpenAsync(target.Store!, StoreAccess.ReadOnly, cancel);
        var stats = await store.StatsAsync(cancel);
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
        var questions = new ReportTable("how questions were found", "lane", "found by", "calls");
        foreach (var lane in body["lanes"]?.AsArray() ?? [])
            foreach (var (source, n) in lane!["questionsBySource"]?.AsObject() ?? [])
                questions.Add(lane["lane"]!.GetValue<string>(), source, Count(n!.GetValue<long>()));
        var templates = new ReportTable("learned templates", "lane", "from calls", "learned", "template");
        foreach (var t in body["templates"]?.AsArray() ?? [])
            templates.Add(t!["lane"]!.GetValue<string>(), Count(t["learnedFrom"]!.GetValue<long>()),
                t["learnedAt"]!.GetValue<DateTimeOffset>().ToString("yyyy-MM-dd HH:mm", CultureInfo.InvariantCulture),
                Shorten(t["template"]!.GetValue<string>()));
        List<ReportTable> tables = [lanes];
        if (reasons.Rows.Count > 0) tables.Add(reasons);
        if (questions.Rows.Count > 0) tables.Add(questions);
        if (templates.Rows.Count > 0) tables.Add(templates);
        return tables;
    }

    /// <summary>
    /// Most characters of a template shown in the table, so that the row fits 80 columns beside the lane, the count
    /// and the date; the whole text is in --json and /admin/stats.
    /// </summary>
    const int TemplateShown = 32;

    /// <summary>A template on one line: line breaks shown as ⏎, and the middle cut around the question when long.</summary>
    static string Shorten(string template)
    {
        var line = template.Replace("\r\n", "⏎").Replace('\n', '⏎').Replace('\r', '⏎');
        if (line.Length <= TemplateShown) return line;
        var at = line.IndexOf(AdminEndpoints.TemplateQuestion, StringComparison.Ordinal);
        var half = (TemplateShown - AdminEndpoints.TemplateQuestion.Length) / 2;
        var before = at <= half ? line[..at] : "…" + line[(at - half + 1)..at];
        var afterStart = at + AdminEndpoints.TemplateQuestion.Length;
        var after = line.Length - afterStart <= half ? line[afterStart..] : line[afterStart..(afterStart + half - 1)] + "…";
        return before + AdminEndpoints.TemplateQuestion + after;
    }

    static string Count(long n) => n.ToString("N0", CultureInfo.InvariantCulture);

    static string Size(long bytes) => bytes switch
    {
        < 1024 => $"{bytes} B",
        < 1 << 20 => (bytes / 1024.0).ToString("0.0", CultureInfo.InvariantCulture) + " KiB",
        _ => (bytes / 1048576.0).ToString("0.0", CultureInfo.InvariantCulture) + " MiB",
    };
}
