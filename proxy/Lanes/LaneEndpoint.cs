using System.Text.RegularExpressions;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Wire;
using RewriteProxy.Wire.Messages;
using RewriteProxy.Wire.Responses;

namespace RewriteProxy.Lanes;

/// <summary>
/// Where a lane call came in: its wire format, the path and query it goes to below <c>Upstream:BaseUrl</c> (for a miss
/// and a bypass alike), and the model its path names (an Azure OpenAI deployment).
/// </summary>
public sealed partial record LaneEndpoint(IWireFormat Format, string UpstreamPath, QueryString Query, string? PathModel)
{
    /// <summary>What of the endpoint is part of the scope: format, upstream path and the query's parameters, sorted.</summary>
    public string ScopeText => Format.Name + " " + UpstreamPath + " " + string.Join("&",
        Microsoft.AspNetCore.WebUtilities.QueryHelpers.ParseQuery(Query.Value)
            .SelectMany(p => p.Value.Select(v => p.Key + "=" + v))
            .Order(StringComparer.Ordinal));

    /// <summary>
    /// The lane call at a provider path (the proxy's path after an optional <c>/lane/{name}</c>), or null when a POST
    /// to that path is not one: chat completions, the Responses API and the Anthropic Messages API, at OpenAI's and
    /// Anthropic's <c>/v1</c> paths and at Azure OpenAI's <c>/openai</c> paths.
    /// </summary>
    public static LaneEndpoint? Match(string providerPath, QueryString query)
    {
        IWireFormat? format = providerPath switch
        {
            "/v1/chat/completions" or "/openai/v1/chat/completions" => ChatCompletionsFormat.Instance,
            "/v1/responses" or "/openai/responses" or "/openai/v1/responses" => ResponsesFormat.Instance,
            "/v1/messages" => MessagesFormat.Instance,
            _ => null,
        };
        if (format is not null) return new LaneEndpoint(format, UpstreamPathOf(providerPath), query, null);
        var deployment = DeploymentChat().Match(providerPath);
        return deployment.Success
            ? new LaneEndpoint(ChatCompletionsFormat.Instance, providerPath, query, Uri.UnescapeDataString(deployment.Groups["d"].Value))
            : null;
    }

    /// <summary>
    /// The path below <c>Upstream:BaseUrl</c> for a provider path: the rest after <c>/v1</c> (the base URL ends in
    /// <c>/v1</c>), or an Azure OpenAI path under <c>/openai</c> whole (the base URL is the resource's root).
    /// </summary>
    public static string UpstreamPathOf(string providerPath) =>
        providerPath.StartsWith("/v1/", StringComparison.Ordinal) || providerPath == "/v1" ? providerPath["/v1".Length..] : providerPath;

    [GeneratedRegex("^/openai/deployments/(?<d>[^/]+)/chat/completions$", RegexOptions.CultureInvariant)]
    private static partial Regex DeploymentChat();
}
