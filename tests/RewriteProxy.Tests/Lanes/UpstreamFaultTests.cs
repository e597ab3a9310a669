using System.Net;
using System.Text;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// Upstream faults the Lanes/ and Forwarding/ tests do not cover: refused connections and hangs on lane calls,
/// connection resets mid-stream and mid-body, 5xx on lanes, truncated streams and bodies. For each: the client gets a
/// clear answer, nothing wrong is cached, and the next call is served.
/// </summary>
public sealed class UpstreamFaultTests : UpstreamAndProxy
{
    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?>
    {
        ["Upstream:Timeout"] = "1s",
        ["Lanes:draft:MaxDrift"] = "0.9",
    };

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    /// <summary>Short so that the hang tests take about a second; hangs are several times longer.</summary>
    static readonly TimeSpan Timeout = TimeSpan.FromSeconds(1);
    static readonly TimeSpan Hang = TimeSpan.FromSeconds(6);
    /// <summary>Longest a client waits on any fault here before the test calls it a hang.</summary>
    static readonly TimeSpan ClientPatience = TimeSpan.FromSeconds(15);

    async Task AssertServedAndCachedAsync(string question)
    {
        Upstream.Handler = null;
        var next = await Proxy.AskAsync("draft", question);
        var again = await Proxy.AskAsync("draft", question);
        Assert.Equal(200, next.Status);
        Assert.Equal("miss", next.Cache); // the fault left no entry behind
        Assert.Equal("A draft answer: " + question, next.Content);
        Assert.Equal("hit-exact", again.Cache);
    }

    [Fact]
    public async Task Refused_connection_on_a_lane_call_is_502_openai_shaped_and_the_proxy_recovers()
    {
        var closed = LoopbackPort.Free();
        await using var proxy = await TestProxy.StartAsync(new Uri($"http://127.0.0.1:{closed}/v1"));

        var reply = await proxy.AskAsync("draft", "When does the night bus start running?");

        Assert.Equal(502, reply.Status);
        var error = await OpenAiError.ReadAsync(reply.Response);
        Assert.Equal("upstream_unreachable", error.Code);
        // The same proxy keeps answering what it can without the upstream.
        using var ready = await proxy.Client.GetAsync("/readyz");
        Assert.Equal(HttpStatusCode.OK, ready.StatusCode);
        Assert.Equal(502, (await proxy.AskAsync("draft", "When does the night bus start running?")).Status);
    }

    [Fact]
    public async Task Reset_mid_stream_on_passthrough_ends_the_client_stream_abnormally_without_a_hang()
    {
        Upstream.Handler = async (context, _) =>
        {
            context.Response.ContentType = "text/event-stream";
            await ScriptedUpstream.WriteEventAsync(context, new JsonObject { ["n"] = 1 });
            await Task.Delay(100);
            context.Abort(); // RST on the upstream connection, the response never finished
        };
        using var request = new HttpRequestMessage(HttpMethod.Post, "/v1/chat/completions")
        {
            Content = new StringContent("{\"model\":\"m\",\"stream\":true,\"messages\":[]}", Encoding.UTF8, "application/json"),
        };
        using var cancel = new CancellationTokenSource(ClientPatience);
        using var response = await Proxy.Client.SendAsync(request, HttpCompletionOption.ResponseHeadersRead, cancel.Token);
        using var reader = new StreamReader(await response.Content.ReadAsStreamAsync(cancel.Token));

        Assert.Equal("data: {\"n\":1}", await reader.ReadLineAsync(cancel.Token));
        // RFC 9112 §7.1: a chunked body ends with a zero-length chunk; without it the client must see an error.
        var broken = await Record.ExceptionAsync(() => reader.ReadToEndAsync(cancel.Token));
        Assert.False(cancel.IsCancellationRequested, "the client stream hung instead of ending");
        Assert.IsAssignableFrom<IOException>(broken is HttpRequestException h ? h.InnerException ?? h : broken);

        Upstream.Handler = null;
        using var next = await Proxy.Client.GetAsync("/v1/models");
        Assert.Equal(HttpStatusCode.OK, next.StatusCode);
    }

    [Fact]
    public async Task Reset_mid_body_on_a_lane_call_is_502_and_not_cached()
    {
        const string question = "How many seats does the town hall theatre have?";
        Upstream.Handler = async (context, _) =>
        {
            var body = ScriptedUpstream.Completed("scripted-model", "A draft answer: " + question).ToJsonString();
            context.Response.ContentType = "application/json";
            context.Response.ContentLength = Encoding.UTF8.GetByteCount(body);
            await context.Response.WriteAsync(body[..(body.Length / 2)]);
            await context.Response.Body.FlushAsync();
            context.Abort();
        };

        var reply = await Proxy.AskAsync("draft", question);

        Assert.Equal(502, reply.Status);
        Assert.Equal("upstream_error", (await OpenAiError.ReadAsync(reply.Response)).Type);
        await AssertServedAndCachedAsync(question);
    }

    [Fact]
    public async Task Hang_past_the_timeout_on_a_lane_call_is_504_for_the_caller_and_every_coalesced_waiter()
    {
        const string question = "Is the ice rink open on Sunday mornings?";
        Upstream.Handler = async (context, _) => await Task.Delay(Hang, context.RequestAborted);

        var started = DateTime.UtcNow;
        var replies = await Task.WhenAll(Enumerable.Range(0, 5).Select(_ => Proxy.AskAsync("draft", question)));
        var took = DateTime.UtcNow - started;

        Assert.All(replies, r => Assert.Equal(504, r.Status));
        foreach (var r in replies) Assert.Equal("upstream_timeout", (await OpenAiError.ReadAsync(r.Response)).Code);
        Assert.True(took < Hang, $"the callers waited {took}, as long as the hang itself");
        Assert.Equal(1, Upstream.ChatCalls); // they were coalesced onto one upstream call
        await AssertServedAndCachedAsync(question);
    }

    [Fact]
    public async Task Upstream_500_on_a_lane_call_is_relayed_with_its_body_to_every_waiter_and_not_cached()
    {
        const string question = "Where can I recycle old paint tins?";
        const string errorBody = "{\"error\":{\"message\":\"internal\",\"type\":\"server_error\",\"code\":\"boom\"}}";
        Upstream.Handler = async (context, _) =>
        {
            await Task.Delay(300); // long enough for the concurrent callers to join one call
            context.Response.StatusCode = 500;
            context.Response.ContentType = "application/json";
            await context.Response.WriteAsync(errorBody);
        };

        var replies = await Task.WhenAll(Enumerable.Range(0, 4).Select(_ => Proxy.AskAsync("draft", question)));

        Assert.All(replies, r => Assert.Equal(500, r.Status));
        Assert.All(replies, r => Assert.Equal(errorBody, r.Body));
        await AssertServedAndCachedAsync(question);
    }

    [Fact]
    public async Task Upstream_503_with_retry_after_on_a_lane_call_keeps_the_retry_after_and_is_not_cached()
    {
        const string question = "Can I renew a parking permit by post?";
        Upstream.Handler = async (context, _) =>
        {
            context.Response.StatusCode = 503;
            // RFC 9110 §10.2.3: Retry-After is an HTTP-date or a number of seconds.
            context.Response.Headers.RetryAfter = "120";
            await context.Response.WriteAsJsonAsync(new { error = new { message = "overloaded", type = "server_error", code = "overloaded" } });
        };

        var reply = await Proxy.AskAsync("draft", question, stream: true);

        Assert.Equal(503, reply.Status);
        Assert.Equal(TimeSpan.FromSeconds(120), reply.Response.Headers.RetryAfter!.Delta);
        Assert.Contains("overloaded", reply.Body);
        await AssertServedAndCachedAsync(question);
    }

    [Fact]
    public async Task Truncated_event_stream_on_passthrough_is_relayed_as_is()
    {
        // Two events, then half of a third, no [DONE]; the upstream ends its response normally.
        const string sent = "data: {\"choices\":[{\"delta\":{\"content\":\"Hel\"}}]}\n\ndata: {\"choices\":[{\"delta\":{\"content\":\"lo\"}}]}\n\ndata: {\"choi";
        Upstream.Handler = async (context, _) =>
        {
            context.Response.ContentType = "text/event-stream";
            await context.Response.WriteAsync(sent);
        };
        using var response = await Proxy.Client.PostAsync("/v1/chat/completions",
            new StringContent("{\"model\":\"m\",\"stream\":true}", Encoding.UTF8, "application/json"));

        Assert.Equal(HttpStatusCode.OK, response.StatusCode);
        Assert.Equal("text/event-stream", response.Content.Headers.ContentType!.MediaType);
        Assert.Equal(sent, await response.Content.ReadAsStringAsync());
    }

    [Fact]
    public async Task Truncated_json_answer_to_a_streaming_lane_client_is_a_502_json_error_not_a_broken_stream()
    {
        const string question = "Which bins take glass jars?";
        Upstream.Handler = async (context, _) =>
        {
            var full = ScriptedUpstream.Completed("scripted-model", "A draft answer: " + question).ToJsonString();
            context.Response.ContentType = "application/json";
            await context.Response.WriteAsync(full[..^20]); // a complete HTTP response whose JSON is cut short
        };

        var reply = await Proxy.AskAsync("draft", question, stream: true);

        Assert.Equal(502, reply.Status);
        Assert.Equal("upstream_invalid_response", (await OpenAiError.ReadAsync(reply.Response)).Code);
        await AssertServedAndCachedAsync(question);
    }
}
