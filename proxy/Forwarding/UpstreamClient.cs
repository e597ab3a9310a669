using System.Diagnostics;
using System.Net;

namespace RewriteProxy.Forwarding;

/// <summary>The one pooled HTTP client to the upstream, shared by passthrough and lane calls.</summary>
public static class UpstreamClient
{
    public static HttpMessageInvoker Create(UpstreamOptions options) =>
        new(new SocketsHttpHandler
        {
            // A proxy relays bytes: no redirects followed, no decompression, no cookies, no system proxy.
            UseProxy = false,
            AllowAutoRedirect = false,
            AutomaticDecompression = DecompressionMethods.None,
            UseCookies = false,
            EnableMultipleHttp2Connections = true,
            ActivityHeadersPropagator = new ReverseProxyPropagatorShim(),
            ConnectTimeout = options.Timeout < TimeSpan.FromSeconds(15) ? options.Timeout : TimeSpan.FromSeconds(15),
            // Re-resolve the provider's DNS now and then, so a long-lived pool follows address changes.
            PooledConnectionLifetime = TimeSpan.FromMinutes(5),
        }, disposeHandler: true);

    /// <summary>Leaves the client's own trace headers as they are instead of adding ours.</summary>
    sealed class ReverseProxyPropagatorShim : DistributedContextPropagator
    {
        public override IReadOnlyCollection<string> Fields => [];
        public override void Inject(Activity? activity, object? carrier, PropagatorSetterCallback? setter) { }
        public override void ExtractTraceIdAndState(object? carrier, PropagatorGetterCallback? getter, out string? traceId, out string? traceState)
        { traceId = null; traceState = null; }
        public override IEnumerable<KeyValuePair<string, string?>>? ExtractBaggage(object? carrier, PropagatorGetterCallback? getter) => null;
    }
}
