using Prometheus;
using RewriteProxy.Cache;
using RewriteProxy.Store;

namespace RewriteProxy.Telemetry;

/// <summary>Fills <c>rewriteproxy_entries</c> just before a scrape, from the store, at most once every few seconds.</summary>
public sealed class EntryGauge(IRewriteStore store, RewriteProxyOptions options)
{
    /// <summary>Scrapes closer together than this reuse the last count: counting a large table on every scrape costs.</summary>
    static readonly TimeSpan MinInterval = TimeSpan.FromSeconds(1);
    DateTimeOffset _last = DateTimeOffset.MinValue;
    volatile bool _stopped;

    public void Register() => Prometheus.Metrics.DefaultRegistry.AddBeforeCollectCallback(RefreshAsync);

    /// <summary>prometheus-net cannot remove a callback; a stopped app's callback does nothing.</summary>
    public void Stop() => _stopped = true;

    public async Task RefreshAsync(CancellationToken cancel)
    {
        if (_stopped || DateTimeOffset.UtcNow - _last < MinInterval) return;
        _last = DateTimeOffset.UtcNow;
        try
        {
            var stats = await store.StatsAsync(cancel);
            foreach (var lane in options.Lanes.Keys)
                ProxyMetrics.Entries.WithLabels(lane).Set(stats.Lanes.FirstOrDefault(l => l.Lane.Equals(lane, StringComparison.OrdinalIgnoreCase))?.Entries ?? 0);
        }
        catch (StoreException)
        {
            // The store is failing; the fail-open counter says so. Keep the last value.
        }
    }
}
