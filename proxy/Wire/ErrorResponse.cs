using System.Text.Json;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire;

/// <summary>OpenAI-shaped error bodies: <c>{"error":{"message","type","code"}}</c>, so client SDKs surface them as usual.</summary>
public static class ErrorResponse
{
    public static byte[] Body(string message, string type, string code) =>
        JsonSerializer.SerializeToUtf8Bytes(new { error = new { message, type, code } });

    /// <summary>Writes the error unless the response has already started (then it can only be aborted).</summary>
    public static async Task WriteAsync(HttpContext context, int status, string message, string type, string code)
    {
        if (context.Response.HasStarted)
        {
            context.Abort();
            return;
        }
        context.Response.StatusCode = status;
        context.Response.ContentType = "application/json";
        var body = Body(message, type, code);
        context.Response.ContentLength = body.Length;
        await context.Response.Body.WriteAsync(body, context.RequestAborted);
    }
}
