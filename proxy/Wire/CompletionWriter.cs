using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire;

/// <summary>
/// Writes a chat completion to the client either as one JSON body or, when the client asked <c>stream: true</c>, as
/// server-sent events: <c>chat.completion.chunk</c> deltas, a finish chunk, a usage chunk when
/// <c>stream_options.include_usage</c> is set, then <c>data: [DONE]</c>.
/// </summary>
public static class CompletionWriter
{
    /// <summary>Streamed content pieces are about this long, cut at whitespace, so clients see a normal token-ish stream.</summary>
    const int StreamPieceChars = 48;

    /// <summary>A completion built from a cache entry, in the shape upstream would have sent.</summary>
    public static JsonObject FromEntry(string model, string content, int promptTokens, int completionTokens) => new()
    {
        ["id"] = NewId(),
        ["object"] = "chat.completion",
        ["created"] = DateTimeOffset.UtcNow.ToUnixTimeSeconds(),
        ["model"] = model,
        ["choices"] = new JsonArray(new JsonObject
        {
            ["index"] = 0,
            ["message"] = new JsonObject { ["role"] = "assistant", ["content"] = content, ["refusal"] = null },
            ["logprobs"] = null,
            ["finish_reason"] = "stop",
        }),
        ["usage"] = new JsonObject
        {
            ["prompt_tokens"] = promptTokens,
            ["completion_tokens"] = completionTokens,
            ["total_tokens"] = promptTokens + completionTokens,
        },
    };

    public static string NewId() => "chatcmpl-rp" + Convert.ToHexStringLower(RandomNumberGenerator.GetBytes(12));

    public static Task WriteAsync(HttpContext context, JsonObject completion, bool stream, bool includeUsage) =>
        stream ? WriteEventsAsync(context, completion, includeUsage) : WriteJsonAsync(context, completion);

    static async Task WriteJsonAsync(HttpContext context, JsonObject completion)
    {
        var bytes = JsonSerializer.SerializeToUtf8Bytes(completion);
        context.Response.StatusCode = StatusCodes.Status200OK;
        context.Response.ContentType = "application/json";
        context.Response.ContentLength = bytes.Length;
        await context.Response.Body.WriteAsync(bytes, context.RequestAborted);
    }

    static async Task WriteEventsAsync(HttpContext context, JsonObject completion, bool includeUsage)
    {
        context.Response.StatusCode = StatusCodes.Status200OK;
        context.Response.ContentType = "text/event-stream";
        context.Response.Headers.CacheControl = "no-cache";
        var id = completion["id"]?.GetValue<string>() ?? NewId();
        var created = completion["created"]?.DeepClone() ?? DateTimeOffset.UtcNow.ToUnixTimeSeconds();
        var model = completion["model"]?.DeepClone();
        var fingerprint = completion["system_fingerprint"]?.DeepClone();
        var choice = completion["choices"]?[0];
        var content = choice?["message"]?["content"]?.GetValue<string>() ?? "";
        var finish = choice?["finish_reason"]?.DeepClone() ?? "stop";

        JsonObject Chunk(JsonObject delta, JsonNode? finishReason)
        {
            var chunk = new JsonObject
            {
                ["id"] = id,
                ["object"] = "chat.completion.chunk",
                ["created"] = created.DeepClone(),
                ["model"] = model?.DeepClone(),
            };
            if (fingerprint is not null) chunk["system_fingerprint"] = fingerprint.DeepClone();
            chunk["choices"] = new JsonArray(new JsonObject
            {
                ["index"] = 0,
                ["delta"] = delta,
                ["logprobs"] = null,
                ["finish_reason"] = finishReason,
            });
            return chunk;
        }

        var buffer = new StringBuilder();
        void Event(JsonNode data) => buffer.Append("data: ").Append(data.ToJsonString()).Append("\n\n");

        Event(Chunk(new JsonObject { ["role"] = "assistant", ["content"] = "", ["refusal"] = null }, null));
        foreach (var piece in Pieces(content)) Event(Chunk(new JsonObject { ["content"] = piece }, null));
        Event(Chunk(new JsonObject(), finish.DeepClone()));
        if (includeUsage && completion["usage"] is JsonNode usage)
        {
            var usageChunk = new JsonObject
            {
                ["id"] = id,
                ["object"] = "chat.completion.chunk",
                ["created"] = created.DeepClone(),
                ["model"] = model?.DeepClone(),
                ["choices"] = new JsonArray(),
                ["usage"] = usage.DeepClone(),
            };
            Event(usageChunk);
        }
        buffer.Append("data: [DONE]\n\n");
        // The whole answer is known: one write, so a cache hit costs one syscall, not one per chunk.
        await context.Response.WriteAsync(buffer.ToString(), context.RequestAborted);
    }

    /// <summary>Cuts text into pieces of about <see cref="StreamPieceChars"/> at whitespace; the pieces concatenate to the text.</summary>
    public static IEnumerable<string> Pieces(string text)
    {
        var start = 0;
        while (start < text.Length)
        {
            var end = Math.Min(text.Length, start + StreamPieceChars);
            if (end < text.Length)
            {
                var cut = text.LastIndexOfAny([' ', '\n'], end - 1, end - start);
                if (cut > start) end = cut + 1;
            }
            yield return text[start..end];
            start = end;
        }
    }
}
