namespace RewriteProxy.Cache;

/// <summary>Which part of the cache side failed; the <c>reason</c> label of <c>rewriteproxy_fail_open_total</c>.</summary>
public enum FailOpenReason { Store, Index, Embedder }

/// <summary>The cache side failed; the caller answers as if there were no cache ("fail open") and counts it.</summary>
public sealed class CacheFailure(FailOpenReason reason, string message, Exception? inner = null) : Exception(message, inner)
{
    public FailOpenReason Reason { get; } = reason;
}

/// <summary>What a lane call's lookup came to; the <c>result</c> label of <c>rewriteproxy_lookups_total</c>.</summary>
public enum CacheResult
{
    /// <summary>Served from the entry of the same normalised question.</summary>
    HitExact,
    /// <summary>Served from the entry of a similar question that the anchor guard let through.</summary>
    HitSemantic,
    /// <summary>Asked upstream; what the guard accepted was stored.</summary>
    Miss,
    /// <summary>Forwarded uncached: a call a cache cannot stand in for, <c>no-store</c>, or a fail-open.</summary>
    Bypass,
    /// <summary>
    /// A <c>Cache-Control: only-if-cached</c> call (a probe) served from the cache. Counted apart from the hits: a
    /// probe's misses are never asked upstream, so counting its hits as hits would lift the hit ratio.
    /// </summary>
    ProbeHit,
    /// <summary>A <c>Cache-Control: only-if-cached</c> call the cache could not answer: 504, the upstream not asked.</summary>
    ProbeMiss,
}
