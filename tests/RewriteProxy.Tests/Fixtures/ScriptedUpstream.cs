using System.Collections.Concurrent;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>One request as the upstream received it, bytes and all.</summary>
public sealed record RecordedRequest(string Method, string Path, string QueryString, IReadOnlyDictionary<string, string> Headers, byte[] Body)
{
    public string BodyText => Encoding.UTF8.GetString(Body);
    public JsonNode? Json => JsonNode.Parse(Body);
}

/// <summary>
/// A stand-in LLM provider: a real Kestrel server on 127.0.0.1 with a random port that records every request and
/// answers chat completions from a script (JSON or server-sent events). Tests replace <see cref="Handler"/> for
/// anything else (errors, hangs, broken streams).
/// </summary>
public sealed class ScriptedUpstream : IAsyncDisposable
{
    readonly WebApplication _app;

    public ConcurrentQueue<RecordedRequest> Requests { get; } = new();

    /// <summary>Content of the assistant message for a chat request; default: "answer to: {last user text}".</summary>
    public Func<JsonNode, string> Completion { get; set; } = request => "answer to: " + LastUserText(request);

    /// <summary>Delay before answering a chat completion (JSON) or before its first chunk (SSE).</summary>
    public TimeSpan Delay { get; set; }

    /// <summary>Delay between server-sent event chunks.</summary>
    public TimeSpan ChunkDelay { get; set; }

    /// <summary>When set, answers every request instead of the script.</summary>
    public Func<HttpContext, RecordedRequest, Task>? Handler { get; set; }

    /// <summary>Count of chat completion calls answered.</summary>
    public int ChatCalls => Requests.Count(r => r.Path.EndsWith("/chat/completions", StringComparison.Ordinal));

    public Uri Root { get; }

    /// <summary>The base URL an app would configure, ending in /v1.</summary>
    public Uri BaseUrl => new(Root, "v1");

    ScriptedUpstream(WebApplication app, Uri root)
    {
        _app = app;
        Root = root;
    }

    public static async Task<ScriptedUpstream> StartAsync()
    {
        var builder = WebApplication.CreateSlimBuilder();
        builder.Logging.ClearProviders();
        builder.WebHost.UseUrls("http://127.0.0.1:0");
        builder.WebHost.ConfigureKestrel(k => k.Limits.MaxRequestBodySize = null);
        var app = builder.Build();
        ScriptedUpstream? self = null;
        app.Run(async context =>
        {
            using var buffer = new MemoryStream();
            await context.Request.Body.CopyToAsync(buffer);
            var headers = context.Request.Headers.ToDictionary(h => h.Key, h => h.Value.ToString(), StringComparer.OrdinalIgnoreCase);
            var recorded = new RecordedRequest(context.Request.Method, context.Request.Path.Value ?? "", context.Request.QueryString.Value ?? "",
                headers, buffer.ToArray());
            self!.Requests.Enqueue(recorded);
            if (self.Handler is { } handler) await handler(context, recorded);
            else await self.AnswerAsync(context, recorded);
        });
        await app.StartAsync();
        var address = app.Urls.First();
        self = new ScriptedUpstream(app, new Uri(address.TrimEnd('/') + "/"));
        return self;
    }

    async Task AnswerAsync(HttpContext context, RecordedRequest request)
    {
        if (!request.Path.EndsWith("/chat/completions", StringComparison.Ordinal))
        {
            // Echo: the body back, byte for byte, with the request's content type.
            context.Response.ContentType = request.Headers.GetValueOrDefault("Content-Type") ?? "application/octet-stream";
            context.Response.Headers["X-Upstream-Path"] = request.Path;
            await context.Response.Body.WriteAsync(request.Body);
            return;
        }
        var json = request.Json!;
        var content = Completion(json);
        var model = json["model"]?.GetValue<string>() ?? "scripted-model";
        if (Delay > TimeSpan.Zero) await Task.Delay(Delay);
        if (json["stream"]?.GetValue<bool>() == true)
            await WriteStreamAsync(context, model, content, json["stream_options"]?["include_usage"]?.GetValue<bool>() == true);
        else
            await context.Response.WriteAsJsonAsync(Completed(model, content));
    }

    public static JsonObject Completed(string model, string content, int promptTokens = 12, int completionTokens = 0) => new()
    {
        ["id"] = "chatcmpl-" + Guid.NewGuid().ToString("N")[..12],
        ["object"] = "chat.completion",
        ["created"] = DateTimeOffset.UtcNow.ToUnixTimeSeconds(),
        ["model"] = model,
        ["choices"] = new JsonArray(new JsonObject
        {
            ["index"] = 0,
            ["message"] = new JsonObject { ["role"] = "assistant", ["content"] = content },
            ["finish_reason"] = "stop",
        }),
        ["usage"] = new JsonObject
        {
            ["prompt_tokens"] = promptTokens,
            ["completion_tokens"] = completionTokens == 0 ? Math.Max(1, content.Length / 4) : completionTokens,
            ["total_tokens"] = promptTokens + (completionTokens == 0 ? Math.Max(1, content.Length / 4) : completionTokens),
        },
    };

    async Task WriteStreamAsync(HttpContext context, string model, string content, bool includeUsage)
    {
        context.Response.ContentType = "text/event-stream";
        var id = "chatcmpl-" + Guid.NewGuid().ToString("N")[..12];
        var pieces = SplitKeepingSpaces(content);
        await WriteEventAsync(context, Chunk(id, model, new JsonObject { ["role"] = "assistant", ["content"] = "" }, null));
        foreach (var piece in pieces)
        {
            if (ChunkDelay > TimeSpan.Zero) await Task.Delay(ChunkDelay);
            await WriteEventAsync(context, Chunk(id, model, new JsonObject { ["content"] = piece }, null));
        }
        await WriteEventAsync(context, Chunk(id, model, new JsonObject(), "stop"));
        if (includeUsage)
        {
            var usage = Completed(model, content)["usage"]!.DeepClone();
            await WriteEventAsync(context, new JsonObject
            {
                ["id"] = id, ["object"] = "chat.completion.chunk", ["created"] = DateTimeOffset.UtcNow.ToUnixTimeSeconds(),
                ["model"] = model, ["choices"] = new JsonArray(), ["usage"] = usage,
            });
        }
        await context.Response.WriteAsync("data: [DONE]\n\n");
        await context.Response.Body.FlushAsync();
    }

    static JsonObject Chunk(string id, string model, JsonObject delta, string? finish) => new()
    {
        ["id"] = id,
        ["object"] = "chat.completion.chunk",
        ["created"] = DateTimeOffset.UtcNow.ToUnixTimeSeconds(),
        ["model"] = model,
        ["choices"] = new JsonArray(new JsonObject { ["index"] = 0, ["delta"] = delta, ["finish_reason"] = finish }),
    };

    public static async Task WriteEventAsync(HttpContext context, JsonNode data)
    {
        await context.Response.WriteAsync("data: " + data.ToJsonString() + "\n\n");
        await context.Response.Body.FlushAsync();
    }

    static List<string> SplitKeepingSpaces(string text)
    {
        var pieces = new List<string>();
        var start = 0;
        for (var i = 1; i <= text.Length; i++)
            if (i == text.Length || text[i] == ' ')
            {
                pieces.Add(text[start..i]);
                start = i;
            }
        return pieces;
    }

    /// <summary>A draft that repeats the question: on topic for the drift guard, and tells which question it answers.</summary>
    public static string DraftAnswer(JsonNode request) => "A draft answer: " + LastUserText(request);

    public static string LastUserText(JsonNode request)
    {
        var messages = request["messages"]!.AsArray();
        for (var i = messages.Count - 1; i >= 0; i--)
            if (messages[i]?["role"]?.GetValue<string>() == "user")
                return messages[i]!["content"] is JsonValue v ? v.GetValue<string>() : messages[i]!["content"]!.ToJsonString();
        return "";
    }

    public async ValueTask DisposeAsync()
    {
        await _app.StopAsync();
        await _app.DisposeAsync();
    }
}
