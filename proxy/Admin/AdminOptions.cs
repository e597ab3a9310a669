namespace RewriteProxy.Admin;

/// <summary>The admin API (<c>Admin:*</c>).</summary>
public sealed record AdminOptions
{
    /// <summary>Bearer token of <c>/admin</c>, at least 16 characters. Default none: the admin API is off until a token is chosen, so no deployment ships with a known credential.</summary>
    public string? Token { get; init; }
}
