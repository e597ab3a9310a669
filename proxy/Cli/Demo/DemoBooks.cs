using RewriteProxy.Cache;
using RewriteProxy.Store;

namespace RewriteProxy.Cli.Demo;

/// <summary>
/// The demo's books: what each lane did as its client saw it, and each count set against the growth of its
/// <c>/metrics</c> series and against the store (tallies, hit counts, event log).
/// </summary>
public static class DemoBooks
{
    public static LaneSummary Summarize(string lane, List<DemoObservation> all, DemoUpstream upstream, MetricsSnapshot before, MetricsSnapshot after)
    {
        var mine = all.Where(o => o.Call.Lane == lane).ToList();
        var paraphrases = mine.Where(o => o.Call.Kind == CallKind.Paraphrase).ToList();
        var nearMisses = mine.Where(o => o.Call.Kind == CallKind.NearMiss).ToList();
        return new LaneSummary
        {
            Lane = lane,
            Calls = mine.Count,
            ExactHits = mine.Count(o => o.Cache == "hit-exact"),
            SemanticHits = mine.Count(o => o.Cache == "hit-semantic"),
            Misses = mine.Count(o => o.Cache == "miss"),
            Bypass = mine.Count(o => o.Cache == "bypass"),
            Errors = mine.Count(o => o.Status != 200),
            UpstreamCalls = upstream.CallsByLane.GetValueOrDefault(lane),
            TokensSaved = mine.Sum(o => o.SavedTokens),
            Fallbacks = mine.Count(o => o.Fallback),
            DropsByReason = Grown(before, after, "rewriteproxy_dropped_total", lane),
            GuardRefusalsByReason = Grown(before, after, "rewriteproxy_guard_rejections_total", lane),
            HitLatency = Percentiles(mine.Where(o => o.IsHit).Select(o => o.Milliseconds)),
            MissLatency = Percentiles(mine.Where(o => o.Cache == "miss").Select(o => o.Milliseconds)),
            Paraphrases = paraphrases.Count,
            ParaphrasesServed = paraphrases.Count(o => o.IsHit),
            NearMisses = nearMisses.Count,
            NearMissesNotServed = nearMisses.Count(o => !o.IsHit && o.Status == 200),
        };
    }

    static Dictionary<string, long> Grown(MetricsSnapshot before, MetricsSnapshot after, string name, string lane) =>
        MetricsSnapshot.Growth(before.SumBy(name, "reason", ("lane", lane)), after.SumBy(name, "reason", ("lane", lane)));

    static long Delta(MetricsSnapshot before, MetricsSnapshot after, string name, params (string, string)[] match) =>
        (long)Math.Round(after.Sum(name, match) - before.Sum(name, match));

    public static IEnumerable<Reconciliation> Reconcile(string lane, List<DemoObservation> all, DemoUpstream upstream,
        MetricsSnapshot before, MetricsSnapshot after, StoreStats stats, List<StoredEntry> entries, List<EventRow> events)
    {
        var mine = all.Where(o => o.Call.Lane == lane).ToList();
        var tallies = stats.Lanes.FirstOrDefault(l => l.Lane.Equals(lane, StringComparison.OrdinalIgnoreCase))
                      ?? new LaneStats(lane, 0, 0, 0, 0, 0, 0, new Dictionary<string, long>(), new Dictionary<string, long>());
        long Lookups(string result) => Delta(before, after, "rewriteproxy_lookups_total", ("lane", lane), ("result", result));
        long Seen(string cache) => mine.Count(o => o.Cache == cache);

        yield return new(lane, "calls", mine.Count, Lookups("hit_exact") + Lookups("hit_semantic") + Lookups("miss") + Lookups("bypass"),
            tallies.HitExact + tallies.HitSemantic + tallies.Miss + tallies.Bypass);
        yield return new(lane, "exact hits", Seen("hit-exact"), Lookups("hit_exact"), tallies.HitExact);
        yield return new(lane, "semantic hits", Seen("hit-semantic"), Lookups("hit_semantic"), tallies.HitSemantic);
        yield return new(lane, "misses", Seen("miss"), Lookups("miss"), tallies.Miss);
        yield return new(lane, "bypass", Seen("bypass"), Lookups("bypass"), tallies.Bypass);
        // Each entry also counts its own hits (hit_count), without telling exact from semantic.
        yield return new(lane, "hits, summed over entries", Seen("hit-exact") + Seen("hit-semantic"),
            Lookups("hit_exact") + Lookups("hit_semantic"), entries.Where(e => e.Lane == lane).Sum(e => e.HitCount));
        yield return new(lane, "tokens saved", mine.Sum(o => o.SavedTokens),
            Delta(before, after, "rewriteproxy_tokens_saved_total", ("lane", lane)), tallies.TokensSaved);
        yield return new(lane, "upstream calls", upstream.CallsByLane.GetValueOrDefault(lane),
            Delta(before, after, "rewriteproxy_upstream_duration_seconds_count", ("lane", lane)), null);
        // Rounds never ask one question twice at once, so no call may have joined another's upstream call.
        yield return new(lane, "coalesced calls", 0, Delta(before, after, "rewriteproxy_coalesced_total", ("lane", lane)), null);

        var metricDrops = Grown(before, after, "rewriteproxy_dropped_total", lane);
        var observedDrops = mine.Where(o => o.Cache == "miss").Sum(o => (long)o.Dropped);
        yield return new(lane, "rewrites dropped", observedDrops, metricDrops.Values.Sum(), tallies.DropsByReason.Values.Sum());
        yield return new(lane, "rewrites dropped, event log", observedDrops, metricDrops.Values.Sum(),
            events.Count(e => e.Lane == lane && e.Kind == "rewrite" && e.Verdict == "dropped"));
        foreach (var reason in metricDrops.Keys.Union(tallies.DropsByReason.Keys).Order(StringComparer.Ordinal))
            yield return new(lane, $"dropped: {reason}", null, metricDrops.GetValueOrDefault(reason), tallies.DropsByReason.GetValueOrDefault(reason));

        var metricRefusals = Grown(before, after, "rewriteproxy_guard_rejections_total", lane);
        foreach (var reason in metricRefusals.Keys.Union(tallies.RefusalsByReason.Keys).Order(StringComparer.Ordinal))
            yield return new(lane, $"guard refused: {reason}", null, metricRefusals.GetValueOrDefault(reason),
                tallies.RefusalsByReason.GetValueOrDefault(reason));
        yield return new(lane, "guard refusals, event log", null, metricRefusals.Values.Sum(),
            events.Count(e => e.Lane == lane && e.Kind == "guard"));
    }

    /// <summary>Nearest-rank percentiles (the textbook definition, common practice).</summary>
    static Latency Percentiles(IEnumerable<double> values)
    {
        var sorted = values.Order().ToArray();
        if (sorted.Length == 0) return new Latency(0, null, null);
        double Rank(double p) => sorted[Math.Max(0, (int)Math.Ceiling(p * sorted.Length) - 1)];
        return new Latency(sorted.Length, Rank(0.50), Rank(0.95));
    }
}
