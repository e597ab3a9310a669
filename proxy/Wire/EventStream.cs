using System.Text;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire;

/// <summary>
/// A server-sent event stream of a whole, known answer: each event with an <c>event:</c> line naming its type and a
/// <c>data:</c> line whose JSON carries the same <c>type</c> first, as the Responses and Messages APIs send them. The
/// answer is known in full, so the stream is written in one go: a cache hit costs one write, not one per event.
/// </summary>
public sealed class EventStream
{
    readonly StringBuilder _buffer = new();
    int _sequence;

    /// <summary>When set, each event also carries a rising <c>sequence_number</c> from 0 (the Responses API's).</summary>
    public bool Numbered { get; init; }

    public void Add(string type, JsonObject fields)
    {
        var data = new JsonObject { ["type"] = type };
        foreach (var (k, v) in fields) data[k] = v?.DeepClone();
        if (Numbered) data["sequence_number"] = _sequence++;
        _buffer.Append("event: ").Append(type).Append('\n').Append("data: ").Append(data.ToJsonString()).Append("\n\n");
    }

    public async Task WriteAsync(HttpContext context)
    {
        context.Response.StatusCode = StatusCodes.Status200OK;
        context.Response.ContentType = "text/event-stream";
        context.Response.Headers.CacheControl = "no-cache";
        await context.Response.WriteAsync(_buffer.ToString(), context.RequestAborted);
    }
}
