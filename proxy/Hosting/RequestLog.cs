using System.Diagnostics;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Hosting;

/// <summary>
/// One Information line per request: method, path, status, milliseconds, and the cache result on lane calls.
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
            if (log.IsEnabled(LogLevel.Information))
            {
                var cache = context.Response.Headers["X-Rewrite-Cache"].ToString();
                Served(log, context.Request.Method, context.Request.Path.Value, context.Response.StatusCode,
                    Stopwatch.GetElapsedTime(start).TotalMilliseconds, cache.Length == 0 ? "-" : cache);
            }
        }
    }

    // Source-generated: no boxing or parsing of the template per request.
    [LoggerMessage(Level = LogLevel.Information, Message = "{Method} {Path} {Status} {ElapsedMs:0.0} ms cache={Cache}")]
    static partial void Served(ILogger logger, string method, string? path, int status, double elapsedMs, string cache);
}
