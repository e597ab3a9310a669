using System.Diagnostics;
using System.Globalization;
using System.Net.Http.Headers;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.Configuration;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;
using RewriteProxy.Lanes;
using RewriteProxy.Store;

namespace RewriteProxy.Cli.Demo;

/// <summary>
/// Runs the demo: starts the scripted upstream and the real proxy (shipped defaults, a temporary store), plays the
/// workload through both lanes with a few concurrent clients, and checks what the client saw against /metrics and
/// the store.
/// </summary>
public static class DemoRunner
{
    /// <summary>What the demo's app sends as its key: one tenant, so one partition.</summary>
    const string AppKey = "demo-app-key";

    const string Model = "gpt-4o-mini";

    /// <summary>Runs one demo.</summary>
    /// <param name="settings">Seed, calls, clients, whether to keep the store, where to write.</param>
    /// <param name="configuration">The shipped configuration (file, environment, command line); the demo overrides the
    /// upstream, the store path, the metrics port and the log level.</param>
    /// <param name="progress">Called after each call with (calls done, calls in all).</param>
    /// <param name="services">Service overrides for the proxy (tests share one loaded model).</param>
    /// <param name="cancel">Stops the run.</param>
    /// <exception cref="DemoException">the configuration cannot run the demo.</exception>
    public static async Task<DemoResult> RunAsync(DemoSettings settings, IConfiguration configuration,
        Action<int, int>? progress = null, Action<IServiceCollection>? services = null, CancellationToken cancel = default)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(settings.Calls, DemoWorkload.Lanes.Length);
        ArgumentOutOfRangeException.ThrowIfLessThan(settings.Clients, 1);
        var watch = Stopwatch.StartNew();
        var folder = Path.Combine(Path.GetTempPath(), "rewriteproxy-demo-" + Guid.NewGuid().ToString("N")[..12]);
        Directory.CreateDirectory(folder);
        var storePath = Path.Combine(folder, "demo.db");
        try
        {
            await using var upstream = await DemoUpstream.StartAsync(settings.Seed, cancel);
            var (options, demoConfiguration) = ReadOptions(configuration, upstream.BaseUrl, storePath);
            WebApplication app;
            try
            {
                app = ProxyApp.Build(options, demoConfiguration, "http://127.0.0.1:0", services);
            }
            catch (StartupException e)
            {
                throw new DemoException(e.Message, e);
            }
            await using (app)
            {
                await app.StartAsync(cancel);
                using var http = new HttpClient { BaseAddress = ProxyApp.BoundAddress(app), Timeout = options.Upstream.Timeout * 3 };
                var before = await ScrapeAsync(http, cancel);
                var since = DateTimeOffset.UtcNow;
                var rounds = DemoWorkload.Build(settings.Seed, settings.Calls);
                var observations = await PlayAsync(http, rounds, settings.Clients, progress, cancel);

                var store = app.Services.GetRequiredService<IRewriteStore>();
                await store.FlushAsync(cancel);
                var after = await ScrapeAsync(http, cancel);
                var stats = await store.StatsAsync(cancel);
                var events = await store.EventsAsync(null, since.AddSeconds(-1), cancel).ToListAsync(cancel);
                var lanes = DemoWorkload.Lanes.Select(l => DemoBooks.Summarize(l, observations, upstream, before, after)).ToList();
                var entries = (await store.ListAsync(new EntryQuery(Limit: int.MaxValue), cancel)).ToList();
                var checks = DemoWorkload.Lanes.SelectMany(l => DemoBooks.Reconcile(l, observations, upstream, before, after, stats, entries, events))
                    .ToList();
                var reports = await WriteTuneReportsAsync(settings, options, store, app.Services.GetRequiredService<IEmbedder>(), cancel);
                await app.StopAsync(cancel);
                var result = new DemoResult
                {
                    Settings = settings,
                    Wall = watch.Elapsed,
                    Lanes = lanes,
                    Checks = checks,
                    Observations = observations,
                    UpstreamBaseUrl = upstream.BaseUrl,
                    KeptStore = settings.Keep ? storePath : null,
                };
                return result with { Written = [.. WriteSummary(result), .. reports] };
            }
        }
        finally
        {
            if (!settings.Keep)
            {
                // The proxy's store closed its own connections when the app was disposed.
                try
                {
                    Directory.Delete(folder, recursive: true);
                }
                catch (IOException)
                {
                    // A temp folder left behind is harmless; the OS cleans /tmp.
                }
            }
        }
    }

    static (RewriteProxyOptions, IConfiguration) ReadOptions(IConfiguration shipped, Uri upstream, string storePath)
    {
        var configuration = new ConfigurationBuilder()
            .AddConfiguration(shipped)
            .AddInMemoryCollection(new Dictionary<string, string?>
            {
                ["Upstream:BaseUrl"] = upstream.ToString(),
                ["Store:Path"] = storePath,
                // /metrics on the proxy's own port, which the demo scrapes.
                ["Metrics:Port"] = "0",
                // The progress bar and the tables are the output; one log line per request would bury them.
                ["Logging:LogLevel:Default"] = "Warning",
            })
            .Build();
        var (options, errors) = OptionsReader.Read(configuration);
        if (options is null) throw new DemoException("configuration: " + string.Join("; ", errors));
        foreach (var lane in DemoWorkload.Lanes)
        {
            var kind = lane == "draft" ? LaneKind.Draft : LaneKind.Siblings;
            if (!options.Lanes.TryGetValue(lane, out var found) || found.Kind != kind)
                throw new DemoException($"the demo needs lane '{lane}' of kind {kind.ToString().ToLowerInvariant()} (Lanes:{lane}:Kind), as shipped in config/rewriteproxy.json");
        }
        return (options, configuration);
    }

    static async Task<MetricsSnapshot> ScrapeAsync(HttpClient http, CancellationToken cancel)
    {
        var text = await http.GetStringAsync("/metrics", cancel);
        return MetricsSnapshot.Parse(text);
    }

    static async Task<List<DemoObservation>> PlayAsync(HttpClient http, IReadOnlyList<IReadOnlyList<DemoCall>> rounds, int clients,
        Action<int, int>? progress, CancellationToken cancel)
    {
        var total = rounds.Sum(r => r.Count);
        var done = 0;
        var observations = new List<DemoObservation>(total);
        progress?.Invoke(0, total);
        foreach (var round in rounds)
        {
            // The round ends before the next begins: what a round asks again was committed in an earlier one.
            var results = new DemoObservation[round.Count];
            await Parallel.ForEachAsync(Enumerable.Range(0, round.Count),
                new ParallelOptions { MaxDegreeOfParallelism = clients, CancellationToken = cancel }, async (i, ct) =>
                {
                    results[i] = await CallAsync(http, round[i], ct);
                    progress?.Invoke(Interlocked.Increment(ref done), total);
                });
            observations.AddRange(results);
        }
        return observations;
    }

    static async Task<DemoObservation> CallAsync(HttpClient http, DemoCall call, CancellationToken cancel)
    {
        var system = call.Lane == "draft" ? DemoScenario.DraftSystemPrompt : DemoScenario.SiblingsSystemPrompt;
        var body = new JsonObject
        {
            ["model"] = Model,
            ["messages"] = new JsonArray(
                new JsonObject { ["role"] = "system", ["content"] = system },
                new JsonObject { ["role"] = "user", ["content"] = call.Question }),
            ["temperature"] = 0,
        };
        using var request = new HttpRequestMessage(HttpMethod.Post, $"/lane/{call.Lane}/v1/chat/completions")
        {
            Content = new StringContent(body.ToJsonString(), Encoding.UTF8, "application/json"),
        };
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", AppKey);
        var start = Stopwatch.GetTimestamp();
        using var response = await http.SendAsync(request, cancel);
        await response.Content.ReadAsByteArrayAsync(cancel);
        var ms = Stopwatch.GetElapsedTime(start).TotalMilliseconds;
        return new DemoObservation(call, (int)response.StatusCode,
            Header(response, RewriteHeaders.Cache) ?? "",
            Header(response, RewriteHeaders.Similarity) is { } s ? double.Parse(s, CultureInfo.InvariantCulture) : null,
            Header(response, RewriteHeaders.Dropped) is { } d ? int.Parse(d, CultureInfo.InvariantCulture) : 0,
            Header(response, RewriteHeaders.SavedTokens) is { } t ? long.Parse(t, CultureInfo.InvariantCulture) : 0,
            Header(response, RewriteHeaders.Fallback) is not null,
            ms);
    }

    static string? Header(HttpResponseMessage response, string name) =>
        response.Headers.TryGetValues(name, out var values) ? string.Join(",", values) : null;

    /// <summary>
    /// The tuning report of each lane over this run's event log (<c>rewriteproxy tune</c>), into <c>{out}/tune-{lane}</c>.
    /// Its console summary is not shown: the demo's own tables say the same.
    /// </summary>
    static async Task<IReadOnlyList<string>> WriteTuneReportsAsync(DemoSettings settings, RewriteProxyOptions options, IRewriteStore store,
        IEmbedder embedder, CancellationToken cancel)
    {
        if (settings.OutDirectory is not { } dir) return [];
        var quiet = Spectre.Console.AnsiConsole.Create(new Spectre.Console.AnsiConsoleSettings
        {
            Out = new Spectre.Console.AnsiConsoleOutput(TextWriter.Null),
        });
        var written = new List<string>();
        foreach (var lane in DemoWorkload.Lanes)
        {
            var outDir = Path.GetFullPath(Path.Combine(dir, "tune-" + lane));
            var request = new TuneRequest(lane, TimeSpan.FromDays(1), null, outDir, TuneSweep.DefaultMaxFalseHits, TuneSweep.DefaultKeepGood, null);
            var exit = await TuneCommand.RunAsync(request, options, () => embedder, quiet, cancel, store);
            if (exit != ExitCodes.Ok) throw new DemoException($"the tuning report of lane '{lane}' failed (exit {exit})");
            written.Add(Path.Combine(outDir, "report.md"));
        }
        return written;
    }

    /// <summary>Writes the run's result as JSON under the output folder, for scripts and for comparing runs.</summary>
    static IReadOnlyList<string> WriteSummary(DemoResult result)
    {
        if (result.Settings.OutDirectory is not { } dir) return [];
        Directory.CreateDirectory(dir);
        var path = Path.Combine(dir, "demo-summary.json");
        var json = JsonSerializer.Serialize(new
        {
            result.Settings.Seed, result.Settings.Calls, result.Settings.Clients,
            WallSeconds = Math.Round(result.Wall.TotalSeconds, 1),
            result.CountsAgree, result.NearMissesKeptApart, result.Lanes, result.Checks,
        }, new JsonSerializerOptions { WriteIndented = true, PropertyNamingPolicy = JsonNamingPolicy.CamelCase });
        File.WriteAllText(path, json);
        return [path];
    }
}
