using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Forwarding;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// The routes of the provider paths: <c>/v1/...</c> (OpenAI, Anthropic and OpenAI-compatible hosts) and
/// <c>/openai/...</c> (Azure OpenAI), each also below a lane's base URL <c>/lane/{name}</c>. A POST that
/// <see cref="LaneEndpoint.Match"/> recognises is a lane call when it comes below a lane's base URL or carries the
/// <c>X-Rewrite-Lane</c> header; everything else passes through untouched.
/// </summary>
public static class LaneEndpoints
{
    public static void Map(WebApplication app, RewriteProxyOptions options)
    {
        app.Map("/lane/{name}/{**rest}", async (HttpContext context, string name, Passthrough passthrough, LaneRouter lanes) =>
        {
            if (!options.Lanes.ContainsKey(name))
            {
                await UnknownLaneAsync(context, options, name);
                return;
            }
            var path = context.Request.Path.Value!;
            var providerPath = path[(path.IndexOf('/', "/lane/".Length))..];
            if (HttpMethods.IsPost(context.Request.Method) && LaneEndpoint.Match(providerPath, context.Request.QueryString) is { } endpoint)
            {
                await lanes.HandleAsync(context, name, endpoint);
                return;
            }
            // A client whose base URL is a lane's may call other endpoints too; they pass through.
            if (IsProviderPath(providerPath)) await passthrough.ForwardAsync(context, LaneEndpoint.UpstreamPathOf(providerPath));
            else await NoRouteAsync(context);
        });
        app.Map("/v1/{**rest}", Direct);
        app.Map("/openai/{**rest}", Direct);
    }

    /// <summary>A call at a provider path without a lane in its path: a lane call only with the X-Rewrite-Lane header.</summary>
    static Task Direct(HttpContext context, Passthrough passthrough, LaneRouter lanes)
    {
        var path = context.Request.Path.Value!;
        if (HttpMethods.IsPost(context.Request.Method) && context.Request.Headers[RewriteHeaders.Lane].ToString() is { Length: > 0 } lane
            && LaneEndpoint.Match(path, context.Request.QueryString) is { } endpoint)
            return lanes.HandleAsync(context, lane, endpoint);
        return passthrough.ForwardAsync(context, LaneEndpoint.UpstreamPathOf(path));
    }

    static bool IsProviderPath(string path) =>
        path.StartsWith("/v1/", StringComparison.Ordinal) || path.StartsWith("/openai/", StringComparison.Ordinal);

    /// <summary>404 for a lane name that is not configured, naming the ones that are.</summary>
    public static Task UnknownLaneAsync(HttpContext context, RewriteProxyOptions options, string laneName)
    {
        var names = options.Lanes.Count == 0 ? "none" : string.Join(", ", options.Lanes.Keys.Order(StringComparer.Ordinal));
        return ErrorResponse.WriteAsync(context, 404, $"Unknown lane '{laneName}'. Configured lanes: {names}.",
            "invalid_request_error", "unknown_lane");
    }

    /// <summary>404 for a path that is neither a provider path nor one of the proxy's own.</summary>
    public static Task NoRouteAsync(HttpContext context) => ErrorResponse.WriteAsync(context, StatusCodes.Status404NotFound,
        $"No route for {context.Request.Method} {context.Request.Path.Value}. RewriteProxy forwards /v1/... and /openai/... to the " +
        "upstream and serves lanes below /lane/{name}/ (see README, \"Pointing an app at the proxy\").", "invalid_request_error", "not_found");
}
