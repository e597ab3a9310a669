using Prometheus;
using RewriteProxy.Cache;
using RewriteProxy.Guard;

namespace RewriteProxy.Telemetry;

/// <summary>
/// Every series the proxy exports, declared once. Label values are bounded: lane names come from configuration,
/// the other labels from fixed word lists; never a question, model, partition or credential.
/// </summary>
public static class ProxyMetrics
{
    /// <summary>The <c>verdict</c> label of <c>rewriteproxy_drift</c>: whether the judged rewrite was kept.</summary>
    public static readonly IReadOnlyList<string> Verdicts = ["accepted", "dropped"];

    /// <summary>
    /// Creates every known series at zero, so the first scrape already has them: a counter that first appears
    /// with a non-zero value loses that first increase in <c>rate()</c>, and dashboards show gaps.
    /// </summary>
    public static void Declare(IEnumerable<Lanes.LaneOptions> lanes)
    {
        lanes = lanes.ToList();
        foreach (var lane in lanes)
        {
            var name = lane.Name;
            LaneMaxDrift.WithLabels(name).Set(lane.MaxDrift);
            foreach (var r in LabelValue.All<CacheResult>()) Lookups.WithLabels(name, r);
            foreach (var v in Verdicts) Drift.WithLabels(name, v);
            foreach (var r in LabelValue.All<DropReason>()) Dropped.WithLabels(name, r);
            foreach (var r in LabelValue.All<AnchorReason>()) GuardRejections.WithLabels(name, r);
            HitSimilarity.WithLabels(name);
            TokensSaved.WithLabels(name);
            Coalesced.WithLabels(name);
            foreach (var o in LabelValue.All<ClaimOutcome>()) ClaimWaits.WithLabels(name, o);
            Entries.WithLabels(name);
        }
        foreach (var r in LabelValue.All<FailOpenReason>()) FailOpen.WithLabels(r);
        QuestionMetrics.Declare(lanes);
    }

    static string Listed<T>() where T : struct, Enum => string.Join(", ", LabelValue.All<T>());

    /// <summary>Dense between 0.1 and 1.0, where drift thresholds live; 1.0–2.0 catches the opposite-meaning tail.</summary>
    static readonly double[] DriftBuckets =
        [0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4, 0.45, 0.5, 0.55, 0.6, 0.65, 0.7, 0.75, 0.8, 0.85, 0.9, 0.95, 1.0, 1.25, 1.5, 2.0];

    static readonly double[] SimilarityBuckets =
        [0.5, 0.6, 0.7, 0.75, 0.8, 0.82, 0.84, 0.86, 0.88, 0.9, 0.92, 0.94, 0.96, 0.98, 0.99, 1.0];

    public static readonly Counter Lookups = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_lookups_total", $"Lane calls by cache result ({Listed<CacheResult>()}).",
        new CounterConfiguration { LabelNames = ["lane", "result"] });

    public static readonly Histogram HitSimilarity = Prometheus.Metrics.CreateHistogram(
        "rewriteproxy_hit_similarity", "Cosine similarity between the asked and the cached question of served semantic hits.",
        new HistogramConfiguration { LabelNames = ["lane"], Buckets = SimilarityBuckets });

    public static readonly Counter GuardRejections = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_guard_rejections_total", $"Semantic candidates refused by the hit decision (hard rules, then the learned combiner), by reason ({Listed<AnchorReason>()}).",
        new CounterConfiguration { LabelNames = ["lane", "reason"] });

    public static readonly Histogram Drift = Prometheus.Metrics.CreateHistogram(
        "rewriteproxy_drift", "Drift (1 - cosine to the question) of judged rewrites, by verdict (accepted, dropped).",
        new HistogramConfiguration { LabelNames = ["lane", "verdict"], Buckets = DriftBuckets });

    public static readonly Counter Dropped = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_dropped_total", $"Rewrites dropped by the drift guard, by reason ({Listed<DropReason>()}).",
        new CounterConfiguration { LabelNames = ["lane", "reason"] });

    public static readonly Histogram UpstreamDuration = Prometheus.Metrics.CreateHistogram(
        "rewriteproxy_upstream_duration_seconds", "Duration of upstream calls made for lane misses, by status code.",
        new HistogramConfiguration { LabelNames = ["lane", "code"], Buckets = Histogram.ExponentialBuckets(0.005, 2, 14) });

    public static readonly Histogram EmbedDuration = Prometheus.Metrics.CreateHistogram(
        "rewriteproxy_embed_duration_seconds", "Duration of one embedding model run (one text or one batch).",
        new HistogramConfiguration { Buckets = Histogram.ExponentialBuckets(0.0005, 2, 12) });

    public static readonly Gauge Entries = Prometheus.Metrics.CreateGauge(
        "rewriteproxy_entries", "Entries in the cache.",
        new GaugeConfiguration { LabelNames = ["lane"] });

    public static readonly Counter TokensSaved = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_tokens_saved_total", "Upstream tokens (prompt + completion) that cache hits did not spend.",
        new CounterConfiguration { LabelNames = ["lane"] });

    public static readonly Counter Coalesced = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_coalesced_total", "Lane calls answered from another caller's in-flight upstream call.",
        new CounterConfiguration { LabelNames = ["lane"] });

    public static readonly Counter ClaimWaits = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_claim_waits_total",
        $"Lane misses that waited for another replica's claim on the same question, by how the wait ended ({Listed<ClaimOutcome>()}).",
        new CounterConfiguration { LabelNames = ["lane", "result"] });

    public static readonly Gauge LaneMaxDrift = Prometheus.Metrics.CreateGauge(
        "rewriteproxy_lane_max_drift", "The configured MaxDrift of each lane, for alerts that compare drift to it.",
        new GaugeConfiguration { LabelNames = ["lane"] });

    public static readonly Counter FailOpen = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_fail_open_total", $"Lane calls forwarded uncached because the cache side failed ({Listed<FailOpenReason>()}).",
        new CounterConfiguration { LabelNames = ["reason"] });
}
