using System.Net;
using System.Net.Http.Headers;
using System.Text;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Forwarding;

/// <summary>Passthrough over real sockets: what the app sends is what the upstream gets, and back.</summary>
public sealed class PassthroughTests : UpstreamAndProxy
{
    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?> { ["Upstream:Timeout"] = "2s" };

    [Fact]
    public async Task Five_megabyte_body_arrives_and_returns_byte_identical()
    {
        var body = new byte[5 * 1024 * 1024];
        new Random(7).NextBytes(body);
        using var content = new ByteArrayContent(body);
        content.Headers.ContentType = new MediaTypeHeaderValue("application/octet-stream");
        using var response = await Proxy.Client.PostAsync("/v1/files", content);

        Assert.Equal(HttpStatusCode.OK, response.StatusCode);
        Assert.Equal(body, await response.Content.ReadAsByteArrayAsync());
        Assert.Equal(body, Upstream.Requests.Single().Body);
    }

    [Fact]
    public async Task Non_ascii_json_is_relayed_byte_identical()
    {
        var json = "{\"model\":\"m\",\"input\":\"Größe, 東京, café — naïve ☕ \\u00e9\"}";
        var bytes = Encoding.UTF8.GetBytes(json);
        using var content = new ByteArrayContent(bytes);
        content.Headers.ContentType = new MediaTypeHeaderValue("application/json") { CharSet = "utf-8" };
        using var response = await Proxy.Client.PostAsync("/v1/embeddings", content);

        Assert.Equal(bytes, Upstream.Requests.Single().Body);
        Assert.Equal(bytes, await response.Content.ReadAsByteArrayAsync());
        Assert.Equal("application/json; charset=utf-8", response.Content.Headers.ContentType!.ToString());
    }

    [Fact]
    public async Task Path_under_the_base_url_and_query_string_are_kept()
    {
        using var response = await Proxy.Client.GetAsync("/v1/models/some%2Fmodel?limit=5&after=a%20b&x=%C3%A9");

        var seen = Upstream.Requests.Single();
        Assert.Equal("/v1/models/some%2Fmodel", seen.Path);
        Assert.Equal("?limit=5&after=a%20b&x=%C3%A9", seen.QueryString);
    }

    [Fact]
    public async Task A_base_url_with_its_own_path_prefix_is_honoured()
    {
        await using var proxy = await TestProxy.StartAsync(new Uri(Upstream.Root, "gateway/openai/v1"));
        using var response = await proxy.Client.GetAsync("/v1/models");

        Assert.Equal("/gateway/openai/v1/models", Upstream.Requests.Single().Path);
    }

    [Fact]
    public async Task Authorization_and_custom_headers_reach_the_upstream_and_hop_by_hop_headers_do_not()
    {
        using var request = new HttpRequestMessage(HttpMethod.Get, "/v1/models");
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", "sk-test-123");
        request.Headers.Add("OpenAI-Organization", "org-42");
        request.Headers.Add("X-Custom", "kept");
        // RFC 9110 §7.6.1: Connection and the fields it names are hop-by-hop and must not be forwarded.
        request.Headers.Add("Connection", "X-Hop");
        request.Headers.Add("X-Hop", "dropped");
        request.Headers.Add("Keep-Alive", "timeout=5");
        request.Headers.Add("Proxy-Authorization", "Basic Zm9vOmJhcg==");
        using var response = await Proxy.Client.SendAsync(request);

        var seen = Upstream.Requests.Single().Headers;
        Assert.Equal("Bearer sk-test-123", seen["Authorization"]);
        Assert.Equal("org-42", seen["OpenAI-Organization"]);
        Assert.Equal("kept", seen["X-Custom"]);
        Assert.False(seen.ContainsKey("X-Hop"), "a field named by Connection is hop-by-hop (RFC 9110 §7.6.1)");
        Assert.False(seen.ContainsKey("Keep-Alive"));
        Assert.Equal(Upstream.Root.Authority, seen["Host"]);
    }

    [Fact]
    public async Task Upstream_error_status_headers_and_body_are_relayed()
    {
        Upstream.Handler = async (context, _) =>
        {
            context.Response.StatusCode = 429;
            context.Response.Headers["Retry-After"] = "17";
            context.Response.Headers["x-request-id"] = "req-abc";
            context.Response.ContentType = "application/json";
            await context.Response.WriteAsync("{\"error\":{\"message\":\"slow down\",\"type\":\"rate_limit\",\"code\":\"rate_limited\"}}");
        };
        using var response = await Proxy.Client.PostAsync("/v1/chat/completions", new StringContent("{}", Encoding.UTF8, "application/json"));

        Assert.Equal((HttpStatusCode)429, response.StatusCode);
        Assert.Equal("17", response.Headers.RetryAfter!.ToString());
        Assert.Equal("req-abc", response.Headers.GetValues("x-request-id").Single());
        Assert.Contains("slow down", await response.Content.ReadAsStringAsync());
    }

    [Theory]
    [InlineData(400)]
    [InlineData(401)]
    [InlineData(404)]
    [InlineData(500)]
    [InlineData(503)]
    public async Task Each_upstream_status_is_relayed(int status)
    {
        Upstream.Handler = (context, _) =>
        {
            context.Response.StatusCode = status;
            return context.Response.WriteAsync("status " + status);
        };
        using var response = await Proxy.Client.GetAsync("/v1/models");
        Assert.Equal(status, (int)response.StatusCode);
        Assert.Equal("status " + status, await response.Content.ReadAsStringAsync());
    }

    [Fact]
    public async Task Event_stream_is_relayed_chunk_by_chunk_before_the_upstream_finishes()
    {
        var firstSeenByClient = new TaskCompletionSource(TaskCreationOptions.RunContinuationsAsynchronously);
        Upstream.Handler = async (context, _) =>
        {
            context.Response.ContentType = "text/event-stream";
            await context.Response.WriteAsync("data: {\"n\":1}\n\n");
            await context.Response.Body.FlushAsync();
            // The upstream sends its last chunk only once the client has read the first through the proxy:
            // if the proxy buffered, this would wait forever (bounded by the timeout below).
            await firstSeenByClient.Task.WaitAsync(TimeSpan.FromSeconds(10));
            await context.Response.WriteAsync("data: {\"n\":2}\n\ndata: [DONE]\n\n");
        };
        using var request = new HttpRequestMessage(HttpMethod.Post, "/v1/chat/completions")
        {
            Content = new StringContent("{\"stream\":true}", Encoding.UTF8, "application/json"),
        };
        using var response = await Proxy.Client.SendAsync(request, HttpCompletionOption.ResponseHeadersRead);
        Assert.Equal("text/event-stream", response.Content.Headers.ContentType!.MediaType);
        using var reader = new StreamReader(await response.Content.ReadAsStreamAsync());

        Assert.Equal("data: {\"n\":1}", await reader.ReadLineAsync());
        firstSeenByClient.SetResult();
        var rest = await reader.ReadToEndAsync();
        Assert.Contains("data: {\"n\":2}", rest);
        Assert.Contains("data: [DONE]", rest);
    }

    [Fact]
    public async Task Unreachable_upstream_gives_502_with_an_openai_shaped_error()
    {
        var port = LoopbackPort.Free();
        await using var proxy = await TestProxy.StartAsync(new Uri($"http://127.0.0.1:{port}/v1"));
        using var response = await proxy.Client.GetAsync("/v1/models");

        Assert.Equal(HttpStatusCode.BadGateway, response.StatusCode);
        var error = await OpenAiError.ReadAsync(response);
        Assert.Equal("upstream_unreachable", error.Code);
        Assert.False(string.IsNullOrEmpty(error.Message));
    }

    [Fact]
    public async Task Upstream_slower_than_the_timeout_gives_504_with_an_openai_shaped_error()
    {
        Upstream.Handler = async (context, _) => await Task.Delay(TimeSpan.FromSeconds(8), context.RequestAborted);
        using var response = await Proxy.Client.GetAsync("/v1/models");

        Assert.Equal(HttpStatusCode.GatewayTimeout, response.StatusCode);
        Assert.Equal("upstream_timeout", (await OpenAiError.ReadAsync(response)).Code);
    }

    [Fact]
    public async Task Paths_outside_v1_are_not_forwarded()
    {
        using var response = await Proxy.Client.GetAsync("/internal/secret");
        Assert.Equal(HttpStatusCode.NotFound, response.StatusCode);
        Assert.Empty(Upstream.Requests);
    }

    [Fact]
    public async Task An_absolute_uri_in_the_request_line_cannot_redirect_traffic()
    {
        // RFC 9112 §3.2.2 absolute-form: the proxy must still send to its configured upstream only.
        using var tcp = new System.Net.Sockets.TcpClient();
        await tcp.ConnectAsync("127.0.0.1", Proxy.Root.Port);
        var stream = tcp.GetStream();
        var raw = $"GET http://169.254.169.254/v1/models HTTP/1.1\r\nHost: 169.254.169.254\r\nConnection: close\r\n\r\n";
        await stream.WriteAsync(Encoding.ASCII.GetBytes(raw));
        var reply = await new StreamReader(stream).ReadToEndAsync();

        Assert.StartsWith("HTTP/1.1 200", reply);
        var seen = Upstream.Requests.Single();
        Assert.Equal("/v1/models", seen.Path);
        Assert.Equal(Upstream.Root.Authority, seen.Headers["Host"]);
    }
}
