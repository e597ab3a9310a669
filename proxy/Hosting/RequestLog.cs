using System.Diagnostics;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Hosting;

/// <summary>
/// One Information line per request: method, path, status, milliseconds, and the cache result on lane calls.
/// Never the query string, a header value or a body: those can hold credentials and personal data.
/// </summary>
public sealed class RequestLog(RequestDelegate next, ILogger<RequestLog> log)
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
            var ms = Stopwatch.GetElapsedTime(start).TotalMilliseconds;
            var cache = context.Response.Headers["X-Rewrite-Cache"].ToString();
            if (cache.Length == 0) cache = "-";
            log.LogInformation("{Method} {Path} {Status} {ElapsedMs:0.0} ms cache={Cache}",
                context.Request.Method, context.Request.Path.Value, context.Response.StatusCode, ms, cache);
        }
    }
}
