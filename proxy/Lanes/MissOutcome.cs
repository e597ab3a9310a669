using System.Text.Json.Nodes;
using RewriteProxy.Store;

namespace RewriteProxy.Lanes;

/// <summary>What a lane miss produced, shared by every caller coalesced onto it.</summary>
public abstract record MissOutcome
{
    /// <summary>The 504 of a miss whose upstream did not answer within <c>Upstream:Timeout</c>.</summary>
    public static MissOutcome UpstreamTimeout { get; } =
        new Error(504, "upstream_error", "upstream_timeout", "The upstream did not answer within Upstream:Timeout.");

    /// <summary>A completion to write (JSON or SSE), with the guard's headers.</summary>
    public sealed record Answer(JsonObject Completion, double? MaxDrift, int Dropped, bool Observed,
        IReadOnlyList<KeyValuePair<string, string[]>> UpstreamHeaders) : MissOutcome;

    /// <summary>The upstream's own non-success answer, relayed as it came; never cached.</summary>
    public sealed record Relayed(UpstreamAnswer Upstream) : MissOutcome;

    /// <summary>
    /// The entry another replica stored for the same question while this one waited on its claim: answered like a hit,
    /// counted as a coalesced miss.
    /// </summary>
    public sealed record Shared(StoredEntry Entry) : MissOutcome;

    /// <summary>An error of the proxy's making (502 invalid answer, 504 timeout, 422 rejected draft).</summary>
    public sealed record Error(int Status, string Type, string Code, string Message) : MissOutcome;
}
