using RewriteProxy.Cache;
using RewriteProxy.Guard;
using RewriteProxy.Store;

namespace RewriteProxy.Telemetry;

/// <summary>
/// Counts what lanes do in both places that report it: Prometheus (this process, since start) and the store's
/// tallies (every process, since the store was created, for <c>rewriteproxy stats</c>).
/// </summary>
public sealed class LaneTally(IRewriteStore store)
{
    public void Lookup(string lane, CacheResult result)
    {
        var label = LabelValue.Of(result);
        ProxyMetrics.Lookups.WithLabels(lane, label).Inc();
        store.Count(lane, Tally.Lookup(label));
    }

    public void Dropped(string lane, DropReason reason)
    {
        var label = LabelValue.Of(reason);
        ProxyMetrics.Dropped.WithLabels(lane, label).Inc();
        store.Count(lane, Tally.Dropped(label));
    }

    public void Refused(string lane, AnchorReason reason)
    {
        var label = LabelValue.Of(reason);
        ProxyMetrics.GuardRejections.WithLabels(lane, label).Inc();
        store.Count(lane, Tally.Refused(label));
    }

    public void Saved(string lane, long tokens)
    {
        ProxyMetrics.TokensSaved.WithLabels(lane).Inc(tokens);
        store.Count(lane, Tally.TokensSaved, tokens);
    }
}
