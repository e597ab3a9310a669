using System.Collections.Concurrent;
using Microsoft.Extensions.Logging;
using RewriteProxy.Cache;

namespace RewriteProxy.Telemetry;

/// <summary>Counts every fail-open and logs it at most once a minute per reason, so a broken store cannot flood the log.</summary>
public sealed class FailOpenLog(ILogger<FailOpenLog> log)
{
    static readonly TimeSpan Quiet = TimeSpan.FromMinutes(1);
    readonly ConcurrentDictionary<FailOpenReason, (DateTimeOffset Last, long Suppressed)> _last = new();

    public void Record(FailOpenReason reason, string message)
    {
        ProxyMetrics.FailOpen.WithLabels(LabelValue.Of(reason)).Inc();
        var now = DateTimeOffset.UtcNow;
        var logIt = false;
        long suppressed = 0;
        _last.AddOrUpdate(reason, _ =>
        {
            logIt = true;
            return (now, 0);
        }, (_, prev) =>
        {
            if (now - prev.Last < Quiet) return (prev.Last, prev.Suppressed + 1);
            logIt = true;
            suppressed = prev.Suppressed;
            return (now, 0);
        });
        if (logIt)
            log.LogError("fail-open ({Reason}): {Message}; calls go to the upstream uncached ({Suppressed} more since the last report)",
                LabelValue.Of(reason), message, suppressed);
    }
}
