using RewriteProxy.Tests.Fixtures;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Telemetry;

/// <summary>
/// A real Prometheus server (Debian package `prometheus`, /usr/bin/prometheus) scrapes the real proxy every second
/// while <see cref="MetricsWorkload"/> runs through it, with config/prometheus/recording.rules.yml and
/// alerts.rules.yml loaded; its HTTP API must then give the per-lane hit and drop ratios the workload produced.
/// </summary>
[Collection(MetricsCollection.Name)]
public sealed class PrometheusEndToEndTests(ITestOutputHelper output) : UpstreamAndProxy
{
    /// <summary>Each test starts the proxy it needs.</summary>
    protected override bool StartsProxy => false;

    const string Draft = "pdraft";
    const string Siblings = "psiblings";

    /// <summary>Upper bound of the whole test: Prometheus start, workload, a few scrapes and rule evaluations.</summary>
    static readonly TimeSpan TestBudget = TimeSpan.FromSeconds(60);

    /// <summary>Ratios of counts are compared as floating point: rate() and division round in the last bits only.</summary>
    const double RatioTolerance = 1e-9;

    [Fact]
    public async Task Prometheus_reports_the_hit_and_drop_ratios_of_a_workload_through_the_proxy()
    {
        using var budget = new CancellationTokenSource(TestBudget);
        await using var proxy = await StartProxyAsync(MetricsWorkload.LaneSettings(Draft, Siblings));
        var rules = new[] { "recording.rules.yml", "alerts.rules.yml" }.Select(f => Path.Combine(PromTools.PrometheusConfigDirectory, f));
        await using var prometheus = await PrometheusServer.StartAsync(proxy.Root.Authority, rules, budget.Token);

        // A first scrape before any lane call: the lookup series start at 0 in Prometheus, so rate() sees every increment.
        var before = await prometheus.WaitForValueAsync($"rewriteproxy_lookups_total{{lane=\"{Draft}\",result=\"miss\"}}", budget.Token);
        Assert.True(before == 0, $"first scrape: {before}; server log:\n{prometheus.Log}");

        var tally = await MetricsWorkload.RunAsync(proxy, Upstream, SharedEmbedder.Instance, Draft, Siblings);

        // Until a scrape after the last call has landed: every lookup and every judged rewrite counted.
        var lanes = $"lane=~\"{Draft}|{Siblings}\"";
        var lookups = tally.Lanes.Sum(l => l.Lookups.Values.Sum());
        var judged = tally.Lanes.Sum(l => l.Judged);
        Assert.True(await UntilAsync(prometheus, $"sum(rewriteproxy_lookups_total{{{lanes}}})", v => v == lookups, budget.Token) == lookups,
            $"lookups never reached {lookups}; server log:\n{prometheus.Log}");
        Assert.True(await UntilAsync(prometheus, $"sum(rewriteproxy_drift_count{{{lanes}}})", v => v == judged, budget.Token) == judged,
            $"judged rewrites never reached {judged}");

        foreach (var lane in tally.Lanes)
        {
            var l = $"lane=\"{lane.Lane}\"";
            // Raw counters at the last scrape: the exact ratios of what the workload did.
            var hitRatio = await prometheus.QueryScalarAsync(
                $"sum by (lane) (rewriteproxy_lookups_total{{result=~\"hit_.*\",{l}}}) / sum by (lane) (rewriteproxy_lookups_total{{result!=\"bypass\",{l}}})",
                budget.Token);
            var dropRatio = await prometheus.QueryScalarAsync(
                $"sum by (lane) (rewriteproxy_dropped_total{{{l}}}) / sum by (lane) (rewriteproxy_drift_count{{{l}}})", budget.Token);
            // The recording rule, over rate()s: exact too, because every lookup series of the lane was first scraped
            // at 0 and all of them share scrape times, so rate() extrapolates numerator and denominator alike.
            var ruleHitRatio = await UntilAsync(prometheus, $"lane:rewriteproxy_hit_ratio:rate5m{{{l}}}",
                v => Math.Abs(v - lane.HitRatio) <= RatioTolerance, budget.Token);
            // Exact for the same reason: ProxyMetrics.Declare creates every drift and drop series at 0 at start.
            var ruleDropRatio = await UntilAsync(prometheus, $"lane:rewriteproxy_drop_ratio:rate5m{{{l}}}",
                v => Math.Abs(v - lane.DropRatio) <= RatioTolerance, budget.Token);
            output.WriteLine($"{lane.Lane}: hit ratio workload {lane.HitRatio} raw {hitRatio} rule {ruleHitRatio}; " +
                $"drop ratio workload {lane.DropRatio} raw {dropRatio} rule {ruleDropRatio}");

            Assert.NotNull(hitRatio);
            Assert.Equal(lane.HitRatio, hitRatio!.Value, RatioTolerance);
            Assert.NotNull(dropRatio);
            Assert.Equal(lane.DropRatio, dropRatio!.Value, RatioTolerance);
            Assert.NotNull(ruleHitRatio);
            Assert.Equal(lane.HitRatio, ruleHitRatio!.Value, RatioTolerance);
            Assert.NotNull(ruleDropRatio);
            Assert.Equal(lane.DropRatio, ruleDropRatio!.Value, RatioTolerance);
        }
    }

    /// <summary>Polls an instant query until <paramref name="done"/> holds or the budget ends; returns the last value seen.</summary>
    static async Task<double?> UntilAsync(PrometheusServer prometheus, string promql, Func<double, bool> done, CancellationToken cancel)
    {
        double? last = null;
        try
        {
            while (true)
            {
                last = await prometheus.QueryScalarAsync(promql, cancel);
                if (last is { } v && done(v)) return last;
                await Task.Delay(PrometheusServer.Interval / 4, cancel);
            }
        }
        catch (OperationCanceledException) when (cancel.IsCancellationRequested)
        {
            return last; // out of budget: the caller's assertion reports the last value
        }
    }
}
