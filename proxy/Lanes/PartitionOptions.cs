namespace RewriteProxy.Lanes;

public enum PartitionMode
{
    /// <summary>SHA-256 of every credential header the client sends: tenants never share entries.</summary>
    Credential,
    /// <summary>One partition for every caller: only for a single-tenant deployment.</summary>
    Shared,
}

/// <summary>The tenant boundary of cache entries (<c>Partition</c>, <c>PartitionHeaders</c>).</summary>
public sealed record PartitionOptions
{
    /// <summary>
    /// Headers that carry a credential in the providers' own schemes: OpenAI's <c>Authorization</c>, Azure OpenAI's
    /// <c>api-key</c>, Anthropic's (and several OpenAI-compatible hosts') <c>x-api-key</c>. Always part of the partition.
    /// </summary>
    public static readonly IReadOnlyList<string> DefaultCredentialHeaders = ["Authorization", "api-key", "x-api-key"];

    /// <summary><c>Partition</c>: <c>credential</c> or <c>shared</c>. Default <c>credential</c>: tenants never share entries unless told to.</summary>
    public PartitionMode Mode { get; init; } = PartitionMode.Credential;

    /// <summary>The built-in credential headers (<see cref="DefaultCredentialHeaders"/>).</summary>
    public IReadOnlyList<string> CredentialHeaders { get; init; } = DefaultCredentialHeaders;

    /// <summary>
    /// <c>PartitionHeaders</c>: further headers that tell tenants apart (a gateway's tenant id, a custom key header).
    /// Default none.
    /// </summary>
    public IReadOnlyList<string> Headers { get; init; } = [];
}
