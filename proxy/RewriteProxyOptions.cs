using RewriteProxy.Admin;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Forwarding;
using RewriteProxy.Lanes;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;

namespace RewriteProxy;

/// <summary>
/// All settings of one proxy process, read once at start by <c>Hosting.OptionsReader</c>. Each part is declared
/// beside the code it configures; every default lives in that part's record, with the reason for it.
/// </summary>
public sealed record RewriteProxyOptions
{
    public required UpstreamOptions Upstream { get; init; }
    public required StoreOptions Store { get; init; }
    public required EmbeddingOptions Embedding { get; init; }
    /// <summary>Rewrite lanes by name (names compare case-insensitively).</summary>
    public required IReadOnlyDictionary<string, LaneOptions> Lanes { get; init; }
    /// <summary>Tenant boundary for cache entries (<c>Partition</c>, <c>PartitionHeaders</c>).</summary>
    public PartitionOptions Partition { get; init; } = new();
    public LimitsOptions Limits { get; init; } = new();
    public AdminOptions Admin { get; init; } = new();
    public EventsOptions Events { get; init; } = new();
    public MetricsOptions Metrics { get; init; } = new();
}

/// <summary>Size limits on what the proxy reads into memory (<c>Limits:*</c>).</summary>
public sealed record LimitsOptions
{
    /// <summary>
    /// Largest lane request body read into memory; above it the client gets 413. Default 1 MiB: a rewrite prompt is a
    /// few kilobytes, so this leaves room for long system prompts while bounding the memory one call can take.
    /// </summary>
    public long MaxRequestBytes { get; init; } = 1 << 20;

    /// <summary>
    /// Largest upstream answer read on a lane call; above it the client gets 502 and nothing is cached. Default 8 MiB:
    /// a rewrite is a paragraph or a few lines, so only a runaway completion comes near it.
    /// </summary>
    public long MaxResponseBytes { get; init; } = 8 << 20;

    /// <summary>
    /// Largest passthrough request body (file uploads included); above it the client gets 413. Default 512 MiB, the
    /// largest file the OpenAI files API accepts (from memory), so no upload the provider takes is refused here.
    /// </summary>
    public long MaxPassthroughBytes { get; init; } = 512L << 20;

    /// <summary>
    /// After this long with no request in flight, one compacting collection gives back the memory a burst left committed
    /// (<see cref="Hosting.IdleTrim"/>); zero turns it off. Default 5 s: a pause between bursts, not between the calls of
    /// one; the collection blocks the process for 35–61 ms after a burst (measured), so it waits for a quiet moment.
    /// </summary>
    public TimeSpan IdleTrimAfter { get; init; } = TimeSpan.FromSeconds(5);
}
