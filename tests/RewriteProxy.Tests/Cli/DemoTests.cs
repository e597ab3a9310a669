using System.Text;
using Microsoft.Data.Sqlite;
using Prometheus;
using RewriteProxy.Cache;
using RewriteProxy.Cli.Demo;
using RewriteProxy.Hosting;
using RewriteProxy.Tests.Fixtures;
using Spectre.Console;

namespace RewriteProxy.Tests.Cli;

/// <summary>The demo reads the process-wide metrics registry, so nothing else may count lane calls while it runs.</summary>
[CollectionDefinition(Name, DisableParallelization = true)]
public sealed class DemoCollection
{
    public const string Name = "demo";
}

[Collection(DemoCollection.Name)]
public sealed class DemoTests
{
    const int SmallRun = 60;

    /// <summary>The configuration file the product ships.</summary>
    static Microsoft.Extensions.Configuration.IConfigurationRoot ShippedConfiguration()
    {
        return ConfigurationLoader.Load(RepositoryRoot.File(ConfigurationLoader.DefaultFile), []);
    }

    static async Task<Dictionary<(string Lane, string Result), double>> LookupsInRegistryAsync()
    {
        // prometheus-net's own exporter, not the demo's scrape of /metrics: a second reading of the same counters.
        using var buffer = new MemoryStream();
        await Metrics.DefaultRegistry.CollectAndExportAsTextAsync(buffer);
        var snapshot = MetricsExposition.Parse(Encoding.UTF8.GetString(buffer.ToArray()));
        var found = new Dictionary<(string, string), double>();
        foreach (var lane in DemoWorkload.Lanes)
            foreach (var (result, value) in snapshot.SumBy("rewriteproxy_lookups_total", "result", ("lane", lane)))
                found[(lane, result)] = value;
        return found;
    }

    [Fact]
    public async Task Small_demo_run_reports_the_counts_that_metrics_and_the_store_hold()
    {
        var outDir = Path.Combine(Path.GetTempPath(), "rewriteproxy-tests", Guid.NewGuid().ToString("N"));
        var before = await LookupsInRegistryAsync();

        var result = await DemoRunner.RunAsync(new DemoSettings { Calls = SmallRun, Keep = true, OutDirectory = outDir },
            ShippedConfiguration(), services: SharedEmbedder.Use);

        var after = await LookupsInRegistryAsync();
        try
        {
            Assert.Equal(SmallRun, result.Observations.Count);
            Assert.All(result.Observations, o => Assert.Equal(200, o.Status));
            Assert.All(result.Checks, c => Assert.True(c.Agrees, $"{c.Lane} {c.What}: client {c.Observed}, /metrics {c.Metrics}, store {c.Store}"));
            Assert.True(result.Succeeded);

            // The store file itself, read with plain SQL, and the registry, read with prometheus-net: not through the demo.
            await using var db = new SqliteConnection($"Data Source={result.KeptStore};Mode=ReadOnly;Pooling=False");
            await db.OpenAsync();
            foreach (var lane in result.Lanes)
            {
                Assert.Equal(lane.Calls, lane.ExactHits + lane.SemanticHits + lane.Misses + lane.Bypass);
                using var hits = db.CreateCommand();
                hits.CommandText = "SELECT COALESCE(SUM(hit_count), 0) FROM entries WHERE lane = $lane";
                hits.Parameters.AddWithValue("$lane", lane.Lane);
                Assert.Equal((long)lane.UpstreamCallsSaved, (long)(await hits.ExecuteScalarAsync())!);
                foreach (var (kind, count) in new[] { ("hit_exact", lane.ExactHits), ("hit_semantic", lane.SemanticHits), ("miss", lane.Misses) })
                    Assert.Equal(count, after.GetValueOrDefault((lane.Lane, kind)) - before.GetValueOrDefault((lane.Lane, kind)));
            }
            Assert.True(File.Exists(Path.Combine(outDir, "demo-summary.json")));
        }
        finally
        {
            // The connection above does not pool, and the demo's store closed its own: nothing is left open.
            Directory.Delete(Path.GetDirectoryName(result.KeptStore!)!, recursive: true);
            Directory.Delete(outDir, recursive: true);
        }
    }

    [Fact]
    public async Task Near_misses_are_never_served_and_paraphrases_are()
    {
        var result = await DemoRunner.RunAsync(new DemoSettings { Calls = SmallRun, Seed = 11, OutDirectory = null },
            ShippedConfiguration(), services: SharedEmbedder.Use);

        var nearMisses = result.Observations.Where(o => o.Call.Kind == CallKind.NearMiss).ToList();
        Assert.NotEmpty(nearMisses);
        Assert.All(nearMisses, o => Assert.Equal("miss", o.Cache));
        var paraphrases = result.Observations.Where(o => o.Call.Kind == CallKind.Paraphrase).ToList();
        Assert.NotEmpty(paraphrases);
        Assert.All(paraphrases, o => Assert.Equal("hit-semantic", o.Cache));
        Assert.All(result.Observations.Where(o => o.Call.Kind == CallKind.Repeat), o => Assert.Equal("hit-exact", o.Cache));
        Assert.Null(result.KeptStore);
    }

    [Fact]
    public void Workload_never_asks_one_question_twice_in_a_round_and_asks_follow_ups_after_their_question()
    {
        var rounds = DemoWorkload.Build(DemoSettings.DefaultSeed, DemoSettings.DefaultCalls);

        Assert.Equal(DemoSettings.DefaultCalls, rounds.Sum(r => r.Count));
        Assert.All(rounds, round => Assert.Equal(round.Count,
            round.Select(c => c.Lane + "\n" + QuestionText.Normalize(c.Question)).Distinct().Count()));
        Assert.All(rounds[0], c => Assert.Equal(CallKind.First, c.Kind));
        var asked = rounds[0].Select(c => (c.Lane, c.Item)).ToHashSet();
        Assert.All(rounds.Skip(1).SelectMany(r => r), c =>
        {
            Assert.NotEqual(CallKind.First, c.Kind);
            Assert.Contains((c.Lane, c.Item), asked);
        });
        var nearMisses = rounds.SelectMany(r => r).Where(c => c.Kind == CallKind.NearMiss).ToList();
        Assert.Equal(nearMisses.Count, nearMisses.Select(c => (c.Lane, c.Question)).Distinct().Count());
        Assert.Equal(rounds.Select(r => r.ToList()), DemoWorkload.Build(DemoSettings.DefaultSeed, DemoSettings.DefaultCalls).Select(r => r.ToList()));
    }

    [Fact]
    public void Counts_that_disagree_fail_the_run_and_are_printed_loudly()
    {
        var lane = new LaneSummary
        {
            Lane = "draft", Calls = 3, ExactHits = 1, Misses = 2,
            DropsByReason = new Dictionary<string, long>(), GuardRefusalsByReason = new Dictionary<string, long>(),
            HitLatency = new Latency(1, 1, 1), MissLatency = new Latency(2, 500, 600),
        };
        var result = new DemoResult
        {
            Settings = new DemoSettings(),
            Wall = TimeSpan.FromSeconds(1),
            Lanes = [lane],
            Checks = [new Reconciliation("draft", "exact hits", 1, 1, 1), new Reconciliation("draft", "misses", 2, 2, 1)],
            Observations = [],
            UpstreamBaseUrl = new Uri("http://127.0.0.1:1/v1"),
        };
        var text = new StringWriter();
        var console = AnsiConsole.Create(new AnsiConsoleSettings
        {
            Ansi = AnsiSupport.No, ColorSystem = ColorSystemSupport.NoColors, Out = new AnsiConsoleOutput(text),
        });

        DemoPrinter.Results(console, result);

        Assert.False(result.CountsAgree);
        Assert.False(result.Succeeded);
        Assert.Contains("DIFFERS", text.ToString());
        Assert.Contains("THE COUNTS DISAGREE", text.ToString());
    }
}
