namespace RewriteProxy.Forwarding;

/// <summary>The LLM provider that every call goes to (<c>Upstream:*</c>).</summary>
public sealed record UpstreamOptions
{
    /// <summary>
    /// Default of <see cref="Timeout"/>: 100 s, the OpenAI .NET SDK's own default (from memory), so the proxy does not
    /// give up on a slow provider before the client would. A constant because <see cref="BaseUrl"/> has no default.
    /// </summary>
    public static readonly TimeSpan DefaultTimeout = TimeSpan.FromSeconds(100);

    /// <summary>Required. Absolute http(s) URL; <c>/v1/x</c> on the proxy goes to <c>{BaseUrl}/x</c>, so it usually ends in <c>/v1</c>.</summary>
    public required Uri BaseUrl { get; init; }

    /// <summary>Longest wait for the upstream's response headers (and, on lane calls, its whole body). Default <see cref="DefaultTimeout"/>.</summary>
    public TimeSpan Timeout { get; init; } = DefaultTimeout;
}
