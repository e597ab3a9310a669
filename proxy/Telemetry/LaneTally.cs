using RewriteProxy.Cache;

namespace RewriteProxy.Telemetry;

/// <summary>
/// Counts what lanes do in both places that report it: Prometheus (this process, since start) and the store's
/// tallies (every process, since the store was created, for <c>rewriteproxy stats</c>).
/// </summary>
public sealed class LaneTally(IRewriteStore store)
{
    public void Lookup(string lane, string result)
    {
        ProxyMetrics.Lookups.WithLabels(lane, result).Inc();
        store.Count(lane, Tally.Lookup(result));
    }

    public void Dropped(string lane, string reason)
    {
        ProxyMetrics.Dropped.WithLabels(lane, reason).Inc();
        store.Count(lane, Tally.Dropped(reason));
    }

    public void Refused(string lane, string reason)
    {
        ProxyMetrics.GuardRejections.WithLabels(lane, reason).Inc();
        store.Count(lane, Tally.Refused(reason));
    }

    public void Saved(string lane, long tokens)
    {
        ProxyMetrics.TokensSaved.WithLabels(lane).Inc(tokens);
        store.Count(lane, Tally.TokensSaved, tokens);
    }
}
