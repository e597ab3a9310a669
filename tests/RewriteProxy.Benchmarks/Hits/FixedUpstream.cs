using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Benchmarks.Hits;

/// <summary>
/// A stand-in LLM provider on 127.0.0.1 with a random port that answers every chat completion with one fixed draft.
/// Only the seeding miss reaches it: hits never go upstream, which the benchmarks check by counting its calls.
/// </summary>
public sealed class FixedUpstream : IAsyncDisposable
{
    readonly WebApplication _app;
    int _calls;

    public Uri BaseUrl { get; }
    public int Calls => Volatile.Read(ref _calls);

    FixedUpstream(WebApplication app, Uri baseUrl)
    {
        _app = app;
        BaseUrl = baseUrl;
    }

    public static async Task<FixedUpstream> StartAsync(string draft)
    {
        var builder = WebApplication.CreateSlimBuilder();
        builder.Logging.ClearProviders();
        builder.WebHost.UseUrls("http://127.0.0.1:0");
        var app = builder.Build();
        var body = new JsonObject
        {
            ["id"] = "chatcmpl-bench",
            ["object"] = "chat.completion",
            ["created"] = 1767225600,
            ["model"] = "bench-model",
            ["choices"] = new JsonArray(new JsonObject
            {
                ["index"] = 0,
                ["message"] = new JsonObject { ["role"] = "assistant", ["content"] = draft },
                ["finish_reason"] = "stop",
            }),
            ["usage"] = new JsonObject { ["prompt_tokens"] = 24, ["completion_tokens"] = 44, ["total_tokens"] = 68 },
        }.ToJsonString();
        FixedUpstream? self = null;
        app.Run(async context =>
        {
            Interlocked.Increment(ref self!._calls);
            await context.Request.Body.CopyToAsync(Stream.Null);
            context.Response.ContentType = "application/json";
            await context.Response.WriteAsync(body);
        });
        await app.StartAsync();
        self = new FixedUpstream(app, new Uri(app.Urls.First().TrimEnd('/') + "/v1"));
        return self;
    }

    public async ValueTask DisposeAsync()
    {
        await _app.StopAsync();
        await _app.DisposeAsync();
    }
}
