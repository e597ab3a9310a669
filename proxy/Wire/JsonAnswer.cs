using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire;

/// <summary>Writes an answer as one JSON body with its length, the non-streamed shape of every format.</summary>
public static class JsonAnswer
{
    public static async Task WriteAsync(HttpContext context, JsonObject answer)
    {
        var bytes = JsonSerializer.SerializeToUtf8Bytes(answer);
        context.Response.StatusCode = StatusCodes.Status200OK;
        context.Response.ContentType = "application/json";
        context.Response.ContentLength = bytes.Length;
        await context.Response.Body.WriteAsync(bytes, context.RequestAborted);
    }
}
