namespace RewriteProxy.Telemetry;

/// <summary>Where <c>/metrics</c> is served (<c>Metrics:*</c>).</summary>
public sealed record MetricsOptions
{
    /// <summary>
    /// Serve <c>/metrics</c> on this port instead of the main one. Default 0 = the main port: one port to open; set one
    /// to keep metrics off a listener that clients reach.
    /// </summary>
    public int Port { get; init; }
}
