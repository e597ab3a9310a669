using RewriteProxy.Guard;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;
using System.Globalization;
using System.Net;
using System.Net.Sockets;
using System.Text.RegularExpressions;
using RewriteProxy.Cache;
using RewriteProxy.Hosting;
using RewriteProxy.Lanes;
using RewriteProxy.Tests.Fixtures;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Telemetry;

/// <summary>
/// /metrics after a scripted workload through the real proxy: linted by the Prometheus project's own promtool
/// (Debian package `prometheus`), parsed here, and compared series by series with the workload's own counts.
/// </summary>
[Collection(MetricsCollection.Name)]
public sealed class MetricsExpositionTests(MetricsWorkloadFixture run, ITestOutputHelper output) : UpstreamAndProxy, IClassFixture<MetricsWorkloadFixture>
{
    /// <summary>Each test starts the proxy it needs.</summary>
    protected override bool StartsProxy => false;

    const string Draft = MetricsWorkloadFixture.DraftLane;
    const string Siblings = MetricsWorkloadFixture.SiblingsLane;

    /// <summary>X-Rewrite-Similarity is written with 4 decimals: each value is within half a unit of the 4th of the observed one.</summary>
    const double HeaderRounding = 0.00005;

    /// <summary>Every family issue 6 asks for, with its Prometheus type and its labels (besides `le`).</summary>
    public static TheoryData<string, string, string> Issue6Series => new()
    {
        { "rewriteproxy_lookups_total", "counter", "lane,result" },
        { "rewriteproxy_hit_similarity", "histogram", "lane" },
        { "rewriteproxy_guard_rejections_total", "counter", "lane,reason" },
        { "rewriteproxy_drift", "histogram", "lane,verdict" },
        { "rewriteproxy_dropped_total", "counter", "lane,reason" },
        { "rewriteproxy_upstream_duration_seconds", "histogram", "lane,code" },
        { "rewriteproxy_embed_duration_seconds", "histogram", "" },
        { "rewriteproxy_entries", "gauge", "lane" },
        { "rewriteproxy_tokens_saved_total", "counter", "lane" },
        { "rewriteproxy_coalesced_total", "counter", "lane" },
        { "rewriteproxy_claim_waits_total", "counter", "lane,result" },
        { "rewriteproxy_fail_open_total", "counter", "reason" },
        { "rewriteproxy_lane_max_drift", "gauge", "lane" },
    };

    /// <summary>promtool's exit code for "the input was read, but the linter found problems" (Prometheus 2.42, cmd/promtool).</summary>
    const int PromtoolLintProblems = 3;

    [Fact]
    public void Promtool_check_metrics_on_the_full_scrape_finds_no_problem_in_our_families()
    {
        // promtool check metrics (Prometheus 2.42) reads an exposition on stdin and lints it against the
        // Prometheus naming conventions, one "<family> <problem>" line per finding. prometheus-net's default
        // runtime series (system_runtime_*, prometheus_net_*) draw findings we do not own; ours must draw none.
        var (exit, output) = CheckMetrics(run.After.Text);

        Assert.True(exit is 0 or PromtoolLintProblems, $"promtool check metrics could not lint the scrape (exit {exit}):\n{output}");
        var findings = output.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);
        Assert.Equal(exit == 0, findings.Length == 0);
        Assert.DoesNotContain(findings, f => f.StartsWith("rewriteproxy_", StringComparison.Ordinal));
        Assert.All(findings, f => Assert.True(run.After.Types.ContainsKey(f.Split(' ')[0]), $"finding about an unknown family: {f}"));
    }

    [Fact]
    public void Our_families_alone_pass_promtool_check_metrics()
    {
        // A second pass over the rewriteproxy_ families only, so that a problem in OUR names cannot hide among
        // (or be excused by) the runtime metrics prometheus-net adds by default.
        var ours = run.After.OnlyFamilies("rewriteproxy_");
        Assert.Contains("rewriteproxy_lookups_total", ours);

        var (exit, output) = CheckMetrics(ours);

        Assert.True(exit == 0, $"promtool check metrics exited {exit} on the rewriteproxy_ families:\n{output}");
    }

    [Theory]
    [MemberData(nameof(Issue6Series))]
    public void Every_issue_6_series_is_exported_with_its_type_and_labels(string family, string type, string labels)
    {
        Assert.True(run.After.Types.TryGetValue(family, out var actual), $"no # TYPE line for {family}");
        Assert.Equal(type, actual);
        var sampleName = type == "histogram" ? family + "_count" : family;
        var samples = run.After.Find(sampleName).ToList();
        Assert.NotEmpty(samples);
        var expected = labels.Split(',', StringSplitOptions.RemoveEmptyEntries).Order();
        Assert.All(samples, s => Assert.Equal(expected, s.Labels.Keys.Order()));
    }

    [Fact]
    public void Lookup_counters_equal_the_cache_headers_of_the_workload()
    {
        foreach (var lane in run.Tally.Lanes)
            output.WriteLine($"{lane.Lane}: lookups {string.Join(" ", lane.Lookups.Select(p => $"{p.Key}={p.Value}"))}; " +
                $"similarities [{string.Join(" ", lane.Similarities)}]; refusals {string.Join(" ", lane.GuardRefusals)}; " +
                $"accepted {lane.Accepted} dropped {lane.Dropped}; upstream {lane.UpstreamCalls}; entries {lane.Entries}; " +
                $"tokens saved {lane.TokensSaved}; coalesced {lane.Coalesced}; hit ratio {lane.HitRatio}; drop ratio {lane.DropRatio}");
        output.WriteLine($"fail-open calls {run.FailOpenCalls}; model runs {run.ModelRuns}");
        foreach (var lane in run.Tally.Lanes)
            foreach (var (result, count) in lane.Lookups)
                Assert.True(count == run.After.Sum("rewriteproxy_lookups_total", ("lane", lane.Lane), ("result", result)),
                    $"{lane.Lane} {result}: workload {count}, scrape {run.After.Sum("rewriteproxy_lookups_total", ("lane", lane.Lane), ("result", result))}");
        // The scenario really has every kind of result in it, or the comparison above proves little.
        Assert.All(new[] { "hit_exact", "hit_semantic", "miss", "bypass" }, r => Assert.True(run.Tally.Draft.Lookups[r] > 0, r));
    }

    [Fact]
    public void Hit_similarity_histogram_holds_every_semantic_hit()
    {
        foreach (var lane in run.Tally.Lanes)
        {
            var name = "rewriteproxy_hit_similarity";
            Assert.Equal(lane.Similarities.Count, run.After.Sum(name + "_count", ("lane", lane.Lane)));
            Assert.InRange(run.After.Sum(name + "_sum", ("lane", lane.Lane)),
                lane.Similarities.Sum() - lane.Similarities.Count * HeaderRounding, lane.Similarities.Sum() + lane.Similarities.Count * HeaderRounding);
            foreach (var bucket in run.After.Find(name + "_bucket", ("lane", lane.Lane)))
            {
                var le = bucket.Labels["le"] == "+Inf" ? double.PositiveInfinity : double.Parse(bucket.Labels["le"], CultureInfo.InvariantCulture);
                // A header value within rounding of a bound could fall either side; the scenario has none (checked here).
                Assert.DoesNotContain(lane.Similarities, s => Math.Abs(s - le) <= HeaderRounding);
                Assert.Equal(lane.Similarities.Count(s => s <= le), bucket.Value);
            }
        }
    }

    [Fact]
    public void Guard_rejections_equal_the_near_misses_by_reason()
    {
        foreach (var lane in run.Tally.Lanes)
        {
            var scraped = run.After.Find("rewriteproxy_guard_rejections_total", ("lane", lane.Lane))
                .ToDictionary(s => s.Labels["reason"], s => s.Value);
            Assert.Equal(lane.GuardRefusals.OrderBy(p => p.Key).Select(p => (p.Key, (double)p.Value)),
                scraped.Where(p => p.Value > 0).OrderBy(p => p.Key).Select(p => (p.Key, p.Value)));
        }
        Assert.Equal(2, run.Tally.Draft.GuardRefusals.Values.Sum());
    }

    [Fact]
    public void Drift_histogram_and_drop_counter_equal_the_judged_rewrites()
    {
        foreach (var lane in run.Tally.Lanes)
        {
            Assert.Equal(lane.Accepted, run.After.Sum("rewriteproxy_drift_count", ("lane", lane.Lane), ("verdict", "accepted")));
            Assert.Equal(lane.Dropped, run.After.Sum("rewriteproxy_drift_count", ("lane", lane.Lane), ("verdict", "dropped")));
            Assert.Equal(lane.Dropped, run.After.Sum("rewriteproxy_dropped_total", ("lane", lane.Lane)));
            foreach (var (reason, count) in lane.DroppedByReason)
                Assert.Equal(count, run.After.Sum("rewriteproxy_dropped_total", ("lane", lane.Lane), ("reason", reason)));
            Assert.True(lane.Dropped > 0 && lane.Accepted > 0, $"{lane.Lane}: the scenario must both keep and drop rewrites");
        }
    }

    [Fact]
    public void Upstream_calls_tokens_saved_coalesced_and_entries_equal_the_workload()
    {
        foreach (var lane in run.Tally.Lanes)
        {
            Assert.Equal(lane.UpstreamCalls, run.After.Sum("rewriteproxy_upstream_duration_seconds_count", ("lane", lane.Lane), ("code", "200")));
            Assert.Equal(lane.UpstreamCalls, run.After.Sum("rewriteproxy_upstream_duration_seconds_count", ("lane", lane.Lane)));
            Assert.Equal(lane.TokensSaved, run.After.Sum("rewriteproxy_tokens_saved_total", ("lane", lane.Lane)));
            Assert.Equal(lane.Coalesced, run.After.Sum("rewriteproxy_coalesced_total", ("lane", lane.Lane)));
            Assert.Equal(lane.Entries, run.After.Sum("rewriteproxy_entries", ("lane", lane.Lane)));
        }
        Assert.True(run.Tally.Draft.Coalesced > 0, "the burst must coalesce at least one caller");
    }

    [Fact]
    public void Lane_max_drift_gauge_is_each_lanes_configured_max_drift()
    {
        Assert.Equal(MetricsWorkload.DraftMaxDrift, run.After.Sum("rewriteproxy_lane_max_drift", ("lane", Draft)));
        Assert.Equal(MetricsWorkload.SiblingsMaxDrift, run.After.Sum("rewriteproxy_lane_max_drift", ("lane", Siblings)));
    }

    [Fact]
    public void Fail_open_counter_moves_by_the_calls_whose_embedder_failed()
    {
        Assert.Equal(["bypass", "bypass"], run.FailOpenReplies);
        Assert.Equal(run.FailOpenCalls, run.Delta("rewriteproxy_fail_open_total", ("reason", "embedder")));
        Assert.Equal(run.FailOpenCalls, run.Delta("rewriteproxy_fail_open_total"));
    }

    [Fact]
    public void Embed_duration_counts_every_model_run()
    {
        Assert.True(run.ModelRuns > 0);
        Assert.Equal(run.ModelRuns, run.Delta("rewriteproxy_embed_duration_seconds_count"));
    }

    [Fact]
    public void No_label_value_carries_a_question_credential_partition_or_model()
    {
        var text = run.After.Text;
        var secrets = run.Tally.QuestionsSent.Concat(MetricsWorkloadFixture.FailOpenQuestions)
            .Concat(run.Tally.QuestionsSent.Select(QuestionText.Normalize))
            .Concat(MetricsWorkload.Credentials)
            .Concat(MetricsWorkload.Credentials.Select(c => PartitionKey.Of(new PartitionOptions(),
                new Microsoft.AspNetCore.Http.HeaderDictionary { ["Authorization"] = "Bearer " + c })))
            .Append(MetricsWorkload.Model);
        foreach (var secret in secrets)
            Assert.False(text.Contains(secret, StringComparison.OrdinalIgnoreCase), $"the scrape contains '{secret}'");

        // Beyond grep: every label of our families is one of design.md's few names, with a short, bounded value.
        var allowed = new Dictionary<string, Regex>
        {
            ["lane"] = new("^[A-Za-z0-9_-]{1,32}$"),
            ["result"] = new("^(hit_exact|hit_semantic|miss|bypass|probe_hit|probe_miss|served|released|timed_out)$"),
            ["verdict"] = new("^(accepted|dropped)$"),
            ["reason"] = new("^[a-z_]{1,16}$"),
            ["code"] = new("^([1-5][0-9][0-9]|timeout|error|too_large)$"),
            ["le"] = new(@"^([0-9.eE+-]+|\+Inf)$"),
        };
        foreach (var sample in run.After.Samples.Where(s => s.Name.StartsWith("rewriteproxy_", StringComparison.Ordinal)))
            foreach (var (label, value) in sample.Labels)
            {
                Assert.True(allowed.TryGetValue(label, out var shape), $"{sample.Name} has label '{label}'");
                Assert.Matches(shape, value);
            }
        var ourLanes = run.After.Samples.Where(s => s.Labels.TryGetValue("lane", out var l) && l is Draft or Siblings).ToList();
        Assert.All(ourLanes.Where(s => s.Name.StartsWith("rewriteproxy_guard_rejections", StringComparison.Ordinal)),
            s => Assert.Contains(s.Labels["reason"], LabelValue.All<AnchorReason>()));
        Assert.All(ourLanes.Where(s => s.Name.StartsWith("rewriteproxy_dropped", StringComparison.Ordinal)),
            s => Assert.Contains(s.Labels["reason"], LabelValue.All<DropReason>()));
    }

    [Fact]
    public async Task Metrics_port_serves_metrics()
    {
        var port = LoopbackPort.Free();
        await using var proxy = await StartProxyAsync(PortSettings(port, "mport"));
        using var metricsClient = new HttpClient { BaseAddress = new Uri($"http://127.0.0.1:{port}/") };

        var scrape = await metricsClient.GetAsync("/metrics");

        Assert.Equal(HttpStatusCode.OK, scrape.StatusCode);
        Assert.Contains("rewriteproxy_lane_max_drift{lane=\"mport\"}", await scrape.Content.ReadAsStringAsync());
    }

    /// <summary>
    /// The contract of Metrics:Port (RewriteProxyOptions: "Serve /metrics on this port instead of the main one"): the
    /// main port keeps serving lanes and passthrough, and answers /metrics with 404 (the route requires the metrics
    /// port's host). A Listen* call in ConfigureKestrel would make Kestrel ignore UseUrls and leave the main port unbound,
    /// which is why ProxyApp adds the metrics port to the URLs instead.
    /// </summary>
    [Fact]
    public async Task Main_port_keeps_serving_lanes_but_not_metrics_when_a_metrics_port_is_set()
    {
        var port = LoopbackPort.Free();
        await using var proxy = await StartProxyAsync(PortSettings(port, "mportmain"));

        var onMainPort = await proxy.Client.GetAsync("/metrics");
        var lane = await proxy.AskAsync("mportmain", "How long does the Marrow Island crossing take?");

        Assert.NotEqual(port, proxy.Root.Port);
        Assert.Equal(HttpStatusCode.NotFound, onMainPort.StatusCode);
        Assert.Equal("miss", lane.Cache);
    }

    static Dictionary<string, string?> PortSettings(int port, string lane) => new()
    {
        ["Metrics:Port"] = port.ToString(CultureInfo.InvariantCulture),
        [$"Lanes:{lane}:Kind"] = "draft",
    };

    static (int Exit, string Output) CheckMetrics(string exposition)
    {
        var file = Path.Combine(Path.GetTempPath(), $"rewriteproxy-scrape-{Guid.NewGuid():N}.prom");
        File.WriteAllText(file, exposition);
        try
        {
            // promtool takes the exposition on stdin only; the shell does the redirection.
            return PromTools.Run("/bin/sh", "-c", "exec \"$0\" check metrics < \"$1\"", PromTools.PromtoolPath, file);
        }
        finally
        {
            File.Delete(file);
        }
    }
}
