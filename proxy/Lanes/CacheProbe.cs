using Microsoft.AspNetCore.Http;
using RewriteProxy.Cache;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// The lane side of <c>Cache-Control: only-if-cached</c> (RFC 9111 §5.2.1.7): the client wants a stored answer or a
/// 504 (Gateway Timeout), and the upstream is never asked. Operators and tests probe the cache with it, so a probe
/// leaves the cache as it found it: nothing is stored, a hit is not recorded on its entry (the entry keeps its place in
/// the eviction order), no tokens count as saved, and the lookup counts as <c>probe_hit</c> or <c>probe_miss</c>,
/// outside the hit ratio.
/// </summary>
public static class CacheProbe
{
    /// <summary>The error <c>code</c> of the 504; its <c>type</c> is <see cref="ErrorType"/>.</summary>
    public const string ErrorCode = "only_if_cached";
    public const string ErrorType = "not_cached";

    /// <summary>
    /// Sent <c>false</c> with the 504: the official OpenAI and Anthropic SDKs obey it and do not retry, where by default
    /// they retry every 5xx. Asking again at once would only repeat the probe.
    /// </summary>
    public const string ShouldRetry = "x-should-retry";

    /// <summary>Why a probe was not answered from the cache, for the 504's message.</summary>
    public enum Unanswered
    {
        /// <summary>No entry matches (or a semantic candidate was refused).</summary>
        NoEntry,
        /// <summary>A call a cache cannot stand in for (<c>X-Rewrite-Bypass</c> says why).</summary>
        NotCacheable,
        /// <summary><c>no-cache</c> or <c>no-store</c> came with it: the cache may not answer either.</summary>
        LookupForbidden,
        /// <summary>The cache side failed (counted as a fail-open).</summary>
        CacheFailed,
    }

    /// <summary>Counts a probe served from the cache; the caller writes the hit.</summary>
    public static void CountHit(LaneTally tally, string lane) => tally.Lookup(lane, CacheResult.ProbeHit);

    /// <summary>Answers a probe the cache cannot serve: 504 in the format's error shape, <c>X-Rewrite-Cache: probe-miss</c>.</summary>
    public static Task WriteUnansweredAsync(HttpContext context, LaneTally tally, string lane, IWireFormat format, Unanswered why)
    {
        tally.Lookup(lane, CacheResult.ProbeMiss);
        context.Response.Headers[RewriteHeaders.Cache] = RewriteHeaders.CacheValue(CacheResult.ProbeMiss);
        context.Response.Headers[ShouldRetry] = "false";
        return format.WriteErrorAsync(context, StatusCodes.Status504GatewayTimeout, Message(why), ErrorType, ErrorCode);
    }

    static string Message(Unanswered why) => "Cache-Control: only-if-cached was sent, " + why switch
    {
        Unanswered.NoEntry => "and the cache holds no answer for this call",
        Unanswered.NotCacheable => "and this call cannot be answered from the cache (see X-Rewrite-Bypass)",
        Unanswered.LookupForbidden => "and no-cache or no-store forbid answering it from the cache",
        _ => "and the cache is unavailable",
    } + "; the upstream was not asked.";
}
