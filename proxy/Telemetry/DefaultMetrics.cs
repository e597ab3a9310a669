using Prometheus;

namespace RewriteProxy.Telemetry;

/// <summary>
/// Which of prometheus-net's own series are exported. Kept apart from <see cref="ProxyMetrics"/> so that choosing
/// them does not first create our metrics (prometheus-net reads this choice when the registry is first used).
/// </summary>
public static class DefaultMetrics
{
    static int DefaultsChosen;

    /// <summary>
    /// Keeps prometheus-net's process and GC series (resident memory, CPU, collections: what a soak watches) and
    /// drops its event-counter, meter and self-debug families, whose names promtool's linter rejects.
    /// </summary>
    public static void UseLintClean()
    {
        if (Interlocked.Exchange(ref DefaultsChosen, 1) == 1) return;
        Prometheus.Metrics.SuppressDefaultMetrics(new SuppressDefaultMetricOptions
        {
            SuppressProcessMetrics = false,
            SuppressEventCounters = true,
            SuppressMeters = true,
            SuppressDebugMetrics = true,
        });
    }

}
