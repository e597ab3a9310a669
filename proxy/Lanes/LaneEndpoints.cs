using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Forwarding;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// The routes that reach a lane: <c>/lane/{name}/v1/chat/completions</c>, and <c>/v1/chat/completions</c> with the
/// <c>X-Rewrite-Lane</c> header. A new wire format is a new route here with its <see cref="IWireFormat"/>.
/// </summary>
public static class LaneEndpoints
{
    public static void Map(WebApplication app, RewriteProxyOptions options)
    {
        var chat = ChatCompletionsFormat.Instance;
        app.MapPost("/lane/{name}/v1/chat/completions", (HttpContext context, string name, LaneRouter lanes) =>
            lanes.HandleAsync(context, name, chat));
        app.Map("/lane/{name}/v1/{**rest}", async (HttpContext context, string name, Passthrough passthrough) =>
        {
            // A client whose base URL is a lane's may call other endpoints too; they pass through.
            if (!options.Lanes.ContainsKey(name))
            {
                await UnknownLaneAsync(context, options, name);
                return;
            }
            var path = context.Request.Path.Value!;
            await passthrough.ForwardAsync(context, path[(path.IndexOf("/v1/", StringComparison.Ordinal) + "/v1".Length)..]);
        });
        app.Map("/v1/{**rest}", (HttpContext context, Passthrough passthrough, LaneRouter lanes) =>
        {
            var rest = context.Request.Path.Value!["/v1".Length..];
            if (HttpMethods.IsPost(context.Request.Method) && rest == chat.UpstreamPath
                && context.Request.Headers[RewriteHeaders.Lane].ToString() is { Length: > 0 } lane)
                return lanes.HandleAsync(context, lane, chat);
            return passthrough.ForwardAsync(context, rest);
        });
    }

    /// <summary>404 for a lane name that is not configured, naming the ones that are.</summary>
    public static Task UnknownLaneAsync(HttpContext context, RewriteProxyOptions options, string laneName)
    {
        var names = options.Lanes.Count == 0 ? "none" : string.Join(", ", options.Lanes.Keys.Order(StringComparer.Ordinal));
        return ErrorResponse.WriteAsync(context, 404, $"Unknown lane '{laneName}'. Configured lanes: {names}.",
            "invalid_request_error", "unknown_lane");
    }
}
