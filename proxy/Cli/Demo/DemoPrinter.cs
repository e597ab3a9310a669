using System.Globalization;
using Spectre.Console;

namespace RewriteProxy.Cli.Demo;

/// <summary>Writes the demo's introduction, results and closing advice; tables are 80 columns wide.</summary>
public static class DemoPrinter
{
    const int Width = 80;

    public static void Introduce(IAnsiConsole console, DemoSettings settings)
    {
        console.MarkupLine("[bold]RewriteProxy demo[/]");
        console.WriteLine($"Scenario: {DemoScenario.Title}.");
        console.WriteLine("Staff ask an assistant about their handbook; it expands each question through");
        console.WriteLine("two lanes: draft (a hypothetical answer) and siblings (related questions).");
        console.WriteLine("The upstream is a SCRIPTED STAND-IN in this process: no network, no key.");
        console.WriteLine($"It answers in {DemoUpstream.MinDelay.TotalMilliseconds:0}-{DemoUpstream.MaxDelay.TotalMilliseconds:0} ms with canned " +
                          "answers,");
        console.WriteLine("some with list noise, echoes, duplicates or off-topic text.");
        console.WriteLine($"Workload: {settings.Calls} calls, {settings.Clients} concurrent clients, seed {settings.Seed}. The proxy runs");
        console.WriteLine("on the shipped defaults (config/rewriteproxy.json) with a temporary store.");
        console.WriteLine();
    }

    public static void Results(IAnsiConsole console, DemoResult result)
    {
        var lanes = result.Lanes;
        var table = new Table { Width = Width, Border = TableBorder.Simple, Title = new TableTitle("What each lane did (client side)") };
        table.AddColumn("");
        foreach (var lane in lanes) table.AddColumn(new TableColumn(lane.Lane).RightAligned());
        void Row(string label, Func<LaneSummary, string> cell) =>
            table.AddRow([Markup.Escape(label), .. lanes.Select(l => Markup.Escape(cell(l)))]);

        Row("calls", l => N(l.Calls));
        Row("exact hits", l => N(l.ExactHits));
        Row("semantic hits", l => N(l.SemanticHits));
        Row("misses", l => N(l.Misses));
        Row("bypass", l => N(l.Bypass));
        Row("errors (status other than 200)", l => N(l.Errors));
        Row("upstream calls made (retries included)", l => N(l.UpstreamCalls));
        Row("upstream calls saved (hits)", l => N(l.UpstreamCallsSaved));
        Row("upstream tokens saved", l => N(l.TokensSaved));
        Row("drafts replaced by the question", l => l.Lane == "draft" ? N(l.Fallbacks) : "-");
        foreach (var reason in lanes.SelectMany(l => l.DropsByReason.Keys).Distinct().Order(StringComparer.Ordinal))
            Row($"rewrites dropped: {reason}", l => N(l.DropsByReason.GetValueOrDefault(reason)));
        if (!lanes.Any(l => l.DropsByReason.Count > 0)) Row("rewrites dropped", _ => "0");
        foreach (var reason in lanes.SelectMany(l => l.GuardRefusalsByReason.Keys).Distinct().Order(StringComparer.Ordinal))
            Row($"anchor guard refused: {reason}", l => N(l.GuardRefusalsByReason.GetValueOrDefault(reason)));
        if (!lanes.Any(l => l.GuardRefusalsByReason.Count > 0)) Row("anchor guard refusals", _ => "0");
        Row("latency of hits, p50 / p95 ms", l => Ms(l.HitLatency));
        Row("latency of misses, p50 / p95 ms", l => Ms(l.MissLatency));
        Row("paraphrases served from the cache", l => $"{l.ParaphrasesServed}/{l.Paraphrases}");
        Row("near-misses NOT served from the cache", l => $"{l.NearMissesNotServed}/{l.NearMisses}");
        console.Write(table);
        console.WriteLine("Drops and refusals come from /metrics (the client sees only a count per answer).");
        console.WriteLine();

        var checks = new Table { Width = Width, Border = TableBorder.Simple, Title = new TableTitle("The same counts in /metrics and in the store") };
        checks.AddColumn("lane");
        checks.AddColumn("count");
        checks.AddColumn(new TableColumn("client").RightAligned());
        checks.AddColumn(new TableColumn("/metrics").RightAligned());
        checks.AddColumn(new TableColumn("store").RightAligned());
        checks.AddColumn("");
        foreach (var c in result.Checks)
            checks.AddRow(Markup.Escape(c.Lane), Markup.Escape(c.What), Opt(c.Observed), Opt(c.Metrics), Opt(c.Store),
                c.Agrees ? "ok" : "[bold red]DIFFERS[/]");
        console.Write(checks);

        if (!result.CountsAgree)
        {
            console.MarkupLine("[bold red]!!! THE COUNTS DISAGREE: what the client saw, /metrics and the store do not match (rows marked DIFFERS).[/]");
            console.MarkupLine("[bold red]!!! This is a bug in the proxy's bookkeeping; the demo exits with status 1.[/]");
        }
        else
            console.WriteLine($"All {result.Checks.Count} counts agree between the client, /metrics and the store.");
        if (!result.NearMissesKeptApart)
            console.MarkupLine("[bold red]!!! A NEAR-MISS WAS SERVED FROM THE CACHE: a question one detail away got another question's rewrite.[/]");
        if (result.Lanes.Any(l => l.Errors > 0))
            console.MarkupLine("[bold red]!!! Some calls failed (status other than 200).[/]");
        console.WriteLine();
    }

    public static void Conclude(IAnsiConsole console, DemoResult result)
    {
        console.WriteLine($"Wall time: {result.Wall.TotalSeconds.ToString("0.0", CultureInfo.InvariantCulture)} s.");
        if (result.KeptStore is { } kept) console.WriteLine($"Store kept: {kept}");
        foreach (var file in result.Written) console.WriteLine($"Wrote {file}");
        console.WriteLine();
        console.WriteLine("The upstream above was a scripted stand-in. For a real provider, run:");
        console.WriteLine("  rewriteproxy serve --Upstream:BaseUrl=https://api.openai.com/v1");
        console.WriteLine("and point your app's base URL at a lane (its provider key passes through):");
        console.WriteLine("  drafts:   http://127.0.0.1:8080/lane/draft/v1");
        console.WriteLine("  siblings: http://127.0.0.1:8080/lane/siblings/v1");
        console.WriteLine("  anything else: http://127.0.0.1:8080/v1 (passed through untouched)");
        console.WriteLine("Metrics: http://127.0.0.1:8080/metrics");
    }

    static string N(long n) => n.ToString(CultureInfo.InvariantCulture);

    static string Opt(long? n) => n is { } v ? N(v) : "-";

    static string Ms(Latency l) => l.Count == 0
        ? "-"
        : $"{l.P50!.Value.ToString("0.0", CultureInfo.InvariantCulture)} / {l.P95!.Value.ToString("0.0", CultureInfo.InvariantCulture)}";
}
