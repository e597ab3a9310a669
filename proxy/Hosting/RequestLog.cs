using System.Diagnostics;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Hosting;

/// <summary>
/// One line per request: method, path, status, milliseconds, and the cache result on lane calls. Lane calls and
/// every request answered with 400 or above are logged at Information; a passthrough call that succeeded is logged at
/// Debug. Why: a line per small passthrough request cost about a third of the proxy's passthrough throughput (console
/// formatting and writing on 2 cores, docs/measurements/performance.md), and those calls are the app's ordinary
/// traffic, which the proxy does not change. Set the level of this category to Debug to log them all.
/// Never the query string, a header value or a body: those can hold credentials and personal data.
/// </summary>
public sealed partial class RequestLog(RequestDelegate next, ILogger<RequestLog> log)
{
    public async Task InvokeAsync(HttpContext context)
    {
        var start = Stopwatch.GetTimestamp();
        try
        {
            await next(context);
        }
        finally
        {
            var cache = context.Response.Headers["X-Rewrite-Cache"].ToString();
            var level = cache.Length > 0 || context.Response.StatusCode >= 400 ? LogLevel.Information : LogLevel.Debug;
            if (log.IsEnabled(level))
                Served(log, level, context.Request.Method, context.Request.Path.Value, context.Response.StatusCode,
                    Stopwatch.GetElapsedTime(start).TotalMilliseconds, cache.Length == 0 ? "-" : cache);
        }
    }

    // Source-generated: no boxing or parsing of the template per request.
    [LoggerMessage(Message = "{Method} {Path} {Status} {ElapsedMs:0.0} ms cache={Cache}")]
    static partial void Served(ILogger logger, LogLevel level, string method, string? path, int status, double elapsedMs, string cache);
}
