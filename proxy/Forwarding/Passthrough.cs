using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Logging;
using RewriteProxy.Wire;
using Yarp.ReverseProxy.Forwarder;

namespace RewriteProxy.Forwarding;

/// <summary>
/// Forwards a request untouched to <c>{Upstream:BaseUrl}/{rest}</c> with YARP's direct forwarder: headers (hop-by-hop
/// ones dropped per RFC 9110 §7.6.1 by YARP), body and response streamed as they arrive, nothing buffered.
/// </summary>
public sealed class Passthrough(IHttpForwarder forwarder, HttpMessageInvoker client, RewriteProxyOptions options, ILogger<Passthrough> log)
{
    readonly string _prefix = options.Upstream.BaseUrl.AbsoluteUri.TrimEnd('/');
    readonly ForwarderRequestConfig _config = new()
    {
        // YARP's activity timeout is an idle timeout: a stream that keeps sending is never cut, a silent one is.
        ActivityTimeout = options.Upstream.Timeout,
    };

    /// <summary>Forwards the request; <paramref name="rest"/> is the path after <c>/v1</c>, starting with '/'.</summary>
    public async Task ForwardAsync(HttpContext context, PathString rest)
    {
        var error = await forwarder.SendAsync(context, _prefix, client, _config, new RestTransformer(rest));
        if (error == ForwarderError.None) return;

        var feature = context.GetForwarderErrorFeature();
        var (status, code, message) = Describe(error);
        if (error == ForwarderError.RequestBodyClient && IsTooLarge(feature?.Exception))
            (status, code, message) = (413, "request_too_large", "The request body is larger than Limits:MaxPassthroughBytes.");
        log.LogWarning("upstream {Error} on {Method} {Path}: {Exception}: {Reason}", error, context.Request.Method,
            context.Request.Path.Value, feature?.Exception?.GetType().Name, feature?.Exception?.Message);
        await ErrorResponse.WriteAsync(context, status, message, "upstream_error", code);
    }

    /// <summary>Kestrel's body-size refusal, however deep YARP wrapped it.</summary>
    static bool IsTooLarge(Exception? e)
    {
        for (; e is not null; e = e.InnerException)
            if (e is Microsoft.AspNetCore.Http.BadHttpRequestException { StatusCode: 413 }) return true;
        return false;
    }

    /// <summary>Which status and words the client sees for each forwarding failure.</summary>
    public static (int Status, string Code, string Message) Describe(ForwarderError error) => error switch
    {
        ForwarderError.RequestTimedOut => (504, "upstream_timeout", "The upstream did not answer within Upstream:Timeout."),
        ForwarderError.Request => (502, "upstream_unreachable", "The upstream could not be reached."),
        ForwarderError.RequestCanceled or ForwarderError.RequestBodyCanceled => (499, "client_closed", "The client closed the request."),
        ForwarderError.RequestBodyClient => (400, "bad_request_body", "The request body could not be read from the client."),
        ForwarderError.ResponseBodyDestination or ForwarderError.ResponseBodyCanceled =>
            (502, "upstream_broken_response", "The upstream response broke off."),
        _ => (502, "upstream_error", "The upstream call failed."),
    };

    /// <summary>Maps the proxy path to the upstream path under the base URL; everything else is YARP's default.</summary>
    sealed class RestTransformer(PathString rest) : HttpTransformer
    {
        public override async ValueTask TransformRequestAsync(HttpContext httpContext, HttpRequestMessage proxyRequest,
            string destinationPrefix, CancellationToken cancellationToken)
        {
            await base.TransformRequestAsync(httpContext, proxyRequest, destinationPrefix, cancellationToken);
            proxyRequest.RequestUri = RequestUtilities.MakeDestinationAddress(destinationPrefix, rest, httpContext.Request.QueryString);
            // The destination's own Host, never the client's: the base URL alone decides where traffic goes.
            proxyRequest.Headers.Host = null;
            foreach (var name in HopByHop.NamedByConnection(httpContext.Request.Headers.Connection))
            {
                proxyRequest.Headers.Remove(name);
                proxyRequest.Content?.Headers.Remove(name);
            }
        }

        public override async ValueTask<bool> TransformResponseAsync(HttpContext httpContext, HttpResponseMessage? proxyResponse,
            CancellationToken cancellationToken)
        {
            var relay = await base.TransformResponseAsync(httpContext, proxyResponse, cancellationToken);
            if (proxyResponse is not null)
                foreach (var name in HopByHop.NamedByConnection(proxyResponse.Headers.Connection))
                    httpContext.Response.Headers.Remove(name);
            return relay;
        }
    }
}
