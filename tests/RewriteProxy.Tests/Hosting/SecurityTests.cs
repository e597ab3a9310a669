using System.Net;
using System.Net.Http.Headers;
using System.Net.Sockets;
using System.Security.Cryptography;
using System.Text;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Hosting;

/// <summary>
/// Tenant isolation under load, the admin API's door, credentials kept out of every file and log, an upstream
/// destination no request can redirect, and the size limits on requests and upstream answers.
/// </summary>
public sealed class SecurityTests : UpstreamAndProxy
{
    protected override bool StartsProxy => false;

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    /// <summary>A tag the upstream derives from the credential it was sent: it shows whose call produced an answer.</summary>
    static string TagOf(string authorization) => "tenant-tag-" + Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(authorization)))[..10];

    [Fact]
    public async Task Twenty_tenants_asking_the_same_questions_at_once_never_get_each_others_answers()
    {
        Upstream.Handler = async (context, recorded) =>
        {
            await Task.Delay(20);
            var tag = TagOf(recorded.Headers.GetValueOrDefault("Authorization") ?? "");
            var question = ScriptedUpstream.LastUserText(recorded.Json!);
            await context.Response.WriteAsJsonAsync(ScriptedUpstream.Completed("scripted-model", $"A draft answer: {question} [{tag}]"));
        };
        await using var proxy = await StartProxyAsync(new Dictionary<string, string?> { ["Lanes:draft:MaxDrift"] = "2" });
        var tenants = Enumerable.Range(0, 20).Select(i => $"sk-tenant-{i:00}-{Guid.NewGuid():N}").ToArray();
        string[] questions =
        [
            "When is the recycling centre open?", "How do I report a broken streetlight?", "Where can I park a camper van?",
            "How much is a swimming pool season ticket?", "Who collects garden waste?",
        ];
        var allTags = tenants.Select(t => TagOf("Bearer " + t)).ToArray();

        for (var round = 0; round < 2; round++) // round 0: misses at once; round 1: hits (and paraphrase lookups) at once
        {
            var calls = tenants.SelectMany(t => questions.Select(q => (Tenant: t, Question: q))).ToArray();
            Random.Shared.Shuffle(calls);
            var replies = await Task.WhenAll(calls.Select(async c => (c.Tenant, Reply: await proxy.AskAsync("draft", c.Question, c.Tenant))));
            foreach (var (tenant, reply) in replies)
            {
                Assert.Equal(200, reply.Status);
                var own = TagOf("Bearer " + tenant);
                Assert.Contains(own, reply.Content);
                Assert.DoesNotContain(allTags.Where(t => t != own), reply.Content.Contains);
                if (round == 1) Assert.Equal("hit-exact", reply.Cache);
            }
        }
        Assert.Equal(tenants.Length * questions.Length, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Admin_api_is_401_without_or_with_a_wrong_token_and_404_when_no_token_is_set()
    {
        const string token = "admin-token-0123456789abcdef";
        await using var on = await StartProxyAsync(new Dictionary<string, string?> { ["Admin:Token"] = token });
        await using var off = await StartProxyAsync();

        foreach (var path in new[] { "/admin/stats", "/admin/entries" })
        {
            Assert.Equal(HttpStatusCode.OK, (await SendAsync(on, HttpMethod.Get, path, token)).StatusCode);
            foreach (var bad in new string?[] { null, "wrong", token + "x", token[..^1], token.ToUpperInvariant() })
            {
                using var response = await SendAsync(on, HttpMethod.Get, path, bad);
                Assert.Equal(HttpStatusCode.Unauthorized, response.StatusCode);
                Assert.Equal("unauthorized", (await OpenAiError.ReadAsync(response)).Code);
            }
            using var offResponse = await SendAsync(off, HttpMethod.Get, path, token);
            Assert.Equal(HttpStatusCode.NotFound, offResponse.StatusCode);
        }
        using var purge = await SendAsync(on, HttpMethod.Post, "/admin/purge", "wrong");
        Assert.Equal(HttpStatusCode.Unauthorized, purge.StatusCode);
        Assert.Empty(Upstream.Requests);
    }

    [Fact]
    public async Task Admin_401_names_the_bearer_scheme()
    {
        await using var on = await StartProxyAsync(
            new Dictionary<string, string?> { ["Admin:Token"] = "admin-token-0123456789abcdef" });
        using var response = await SendAsync(on, HttpMethod.Get, "/admin/stats", "wrong");

        Assert.Equal(HttpStatusCode.Unauthorized, response.StatusCode);
        // RFC 6750 §3: a 401 for a bearer-protected resource MUST carry WWW-Authenticate with the Bearer scheme.
        Assert.Equal("Bearer", Assert.Single(response.Headers.WwwAuthenticate).Scheme);
    }

    static async Task<HttpResponseMessage> SendAsync(TestProxy proxy, HttpMethod method, string path, string? token)
    {
        using var request = new HttpRequestMessage(method, path);
        if (method == HttpMethod.Post) request.Content = new StringContent("{\"lane\":\"draft\"}", Encoding.UTF8, "application/json");
        if (token is not null) request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", token);
        var response = await proxy.Client.SendAsync(request);
        await response.Content.LoadIntoBufferAsync();
        return response;
    }

    [Fact]
    public async Task Credentials_never_reach_the_store_the_wal_the_event_log_or_the_console_log()
    {
        var credential = "sk-canary-" + Guid.NewGuid().ToString("N");
        var keyCredential = "key-canary-" + Guid.NewGuid().ToString("N");
        const string adminToken = "admin-canary-0123456789abcdef0123";
        var storePath = TestProxy.NewStorePath();
        // Debug level: more is logged than the shipped Information level, so more places a credential could leak.
        await using var proxy = await ProxyProcess.StartAsync(Upstream.BaseUrl, storePath, new Dictionary<string, string>
        {
            ["Admin:Token"] = adminToken,
            ["Lanes:draft:MaxDrift"] = "2",
            ["Logging:LogLevel:Default"] = "Debug",
        });
        var client = proxy.Client;
        await client.AskAsync("draft", "How do I reset the PIN of my library card?", credential);
        await client.AskAsync("draft", "How do I reset the PIN of my library card?", credential);
        await client.AskAsync("draft", "How can I reset my library card PIN?", credential);
        await client.AskAsync("siblings", "Where is the lost property office?", credential, stream: true);
        // The other credential schemes: Azure OpenAI's api-key and Anthropic's x-api-key.
        foreach (var header in new[] { "api-key", "x-api-key" })
        {
            using var request = new HttpRequestMessage(HttpMethod.Post, "/lane/draft/v1/chat/completions")
            {
                Content = new StringContent(LaneCalls.Request("Where can I charge an electric scooter?").ToJsonString(), Encoding.UTF8,
                    "application/json"),
            };
            request.Headers.TryAddWithoutValidation(header, keyCredential);
            (await client.SendAsync(request)).Dispose();
        }
        var bypass = LaneCalls.Request("What is on this photo?");
        bypass["tools"] = new JsonArray(new JsonObject { ["type"] = "function", ["function"] = new JsonObject { ["name"] = "look" } });
        await client.PostLaneAsync("draft", bypass, credential);
        using (var request = new HttpRequestMessage(HttpMethod.Get, $"/v1/models?key={credential}"))
        {
            request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", credential);
            (await client.SendAsync(request)).Dispose();
        }
        Upstream.Handler = (context, _) => { context.Response.StatusCode = 401; return context.Response.WriteAsync("{\"error\":{\"message\":\"bad key\"}}"); };
        await client.AskAsync("draft", "Is the museum open at night?", credential);
        Upstream.Handler = null;
        using (var request = new HttpRequestMessage(HttpMethod.Get, "/admin/entries?limit=5"))
        {
            request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", adminToken);
            using var entries = await client.SendAsync(request);
            Assert.Equal(HttpStatusCode.OK, entries.StatusCode);
            Assert.DoesNotContain(credential, await entries.Content.ReadAsStringAsync());
        }
        using (var request = new HttpRequestMessage(HttpMethod.Get, "/admin/stats"))
        {
            request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", credential); // the wrong token: logged?
            (await client.SendAsync(request)).Dispose();
        }
        // Stop by SIGKILL with the WAL still in place: the -wal file is read as it was left.
        Assert.True(Upstream.ChatCalls >= 5);
        await Task.Delay(1500); // let the background writer commit events and hit counts
        proxy.Kill();

        var dir = Path.GetDirectoryName(storePath)!;
        var files = Directory.GetFiles(dir);
        Assert.Contains(files, f => f.EndsWith("-wal", StringComparison.Ordinal));
        foreach (var secret in new[] { credential, keyCredential, adminToken })
        {
            var utf8 = Encoding.UTF8.GetBytes(secret);
            foreach (var file in files)
                Assert.False(File.ReadAllBytes(file).AsSpan().IndexOf(utf8) >= 0, $"{secret} found in {Path.GetFileName(file)}");
            Assert.DoesNotContain(secret, proxy.Log);
        }
        // The log is not empty: the check above looked at something real.
        Assert.Contains("/lane/draft/v1/chat/completions", proxy.Log);
    }

    [Fact]
    public async Task No_host_header_forwarded_host_absolute_uri_or_path_trick_sends_traffic_elsewhere()
    {
        await using var evil = await ScriptedUpstream.StartAsync();
        await using var proxy = await StartProxyAsync(new Dictionary<string, string?> { ["Lanes:draft:MaxDrift"] = "2" });
        var evilHost = evil.Root.Authority;
        // A distinct question per lane call, so that each is a miss that must reach an upstream.
        var n = 0;
        string Chat() => LaneCalls.Request($"Where do I pick up parking permit number {++n}?").ToJsonString();
        string[] raw =
        [
            $"GET /v1/models HTTP/1.1\r\nHost: {evilHost}\r\n",
            $"GET /v1/models HTTP/1.1\r\nHost: {proxy.Root.Authority}\r\nX-Forwarded-Host: {evilHost}\r\nX-Forwarded-Proto: http\r\nForwarded: host={evilHost}\r\n",
            $"GET http://{evilHost}/v1/models HTTP/1.1\r\nHost: {evilHost}\r\n",
            $"GET /v1//{evilHost}/models HTTP/1.1\r\nHost: {proxy.Root.Authority}\r\n",
            $"GET /v1/@{evilHost}/models HTTP/1.1\r\nHost: {proxy.Root.Authority}\r\n",
            $"GET //{evilHost}/v1/models HTTP/1.1\r\nHost: {proxy.Root.Authority}\r\n",
            $"GET /v1/../../{evilHost}/v1/models HTTP/1.1\r\nHost: {proxy.Root.Authority}\r\n",
            Post($"http://{evilHost}/lane/draft/v1/chat/completions", evilHost, Chat()),
            Post("/lane/draft/v1/chat/completions", evilHost, Chat(), $"X-Forwarded-Host: {evilHost}\r\n"),
            Post("/v1/chat/completions", evilHost, Chat(), "X-Rewrite-Lane: draft\r\n"),
        ];

        foreach (var request in raw)
        {
            var before = Upstream.Requests.Count;
            var reply = await SendRawAsync(proxy.Root.Port, request);
            var status = int.Parse(reply.Split(' ', 3)[1]);
            if (Upstream.Requests.Count > before)
            {
                var seen = Upstream.Requests.Last();
                Assert.Equal(Upstream.Root.Authority, seen.Headers["Host"]);
                Assert.StartsWith("/v1/", seen.Path);
            }
            else
            {
                Assert.InRange(status, 400, 499); // refused by the proxy itself, not forwarded
            }
        }
        Assert.Empty(evil.Requests);
        Assert.True(Upstream.Requests.Count >= 5, $"only {Upstream.Requests.Count} of the requests were forwarded at all");
    }

    static string Post(string target, string host, string json, string extra = "") =>
        $"POST {target} HTTP/1.1\r\nHost: {host}\r\n{extra}Content-Type: application/json\r\nContent-Length: {Encoding.UTF8.GetByteCount(json)}\r\n\r\n{json}";

    /// <summary>One request per connection, written as raw bytes so no client library normalises it first.</summary>
    static async Task<string> SendRawAsync(int port, string request)
    {
        using var tcp = new TcpClient();
        await tcp.ConnectAsync(IPAddress.Loopback, port);
        var stream = tcp.GetStream();
        var text = request.Contains("\r\n\r\n") ? request.Replace("HTTP/1.1\r\n", "HTTP/1.1\r\nConnection: close\r\n")
            : request + "Connection: close\r\n\r\n";
        await stream.WriteAsync(Encoding.UTF8.GetBytes(text));
        using var cancel = new CancellationTokenSource(TimeSpan.FromSeconds(20));
        return await new StreamReader(stream).ReadToEndAsync(cancel.Token);
    }

    [Fact]
    public async Task Passthrough_body_over_max_passthrough_bytes_is_413()
    {
        await using var proxy = await StartProxyAsync(new Dictionary<string, string?> { ["Limits:MaxPassthroughBytes"] = "65536" });
        foreach (var chunked in new[] { false, true })
        {
            var body = new byte[100_000];
            HttpContent content = chunked ? new StreamContent(new NoLength(body)) : new ByteArrayContent(body);
            content.Headers.ContentType = new MediaTypeHeaderValue("application/octet-stream");
            using var response = await proxy.Client.PostAsync("/v1/files", content);

            Assert.Equal(HttpStatusCode.RequestEntityTooLarge, response.StatusCode);
        }
        using var small = await proxy.Client.PostAsync("/v1/files", new ByteArrayContent(new byte[60_000]));
        Assert.Equal(HttpStatusCode.OK, small.StatusCode);
    }

    [Theory]
    [InlineData(false)]
    [InlineData(true)]
    public async Task Upstream_answer_over_max_response_bytes_is_502_and_not_cached(bool chunked)
    {
        const string question = "How long may a boat stay at the visitor pontoon?";
        var big = ScriptedUpstream.Completed("scripted-model", "A draft answer: " + question + new string('.', 20_000)).ToJsonString();
        Upstream.Handler = async (context, _) =>
        {
            context.Response.ContentType = "application/json";
            if (!chunked) context.Response.ContentLength = Encoding.UTF8.GetByteCount(big);
            await context.Response.WriteAsync(big);
        };
        await using var proxy = await StartProxyAsync(new Dictionary<string, string?>
        {
            ["Limits:MaxResponseBytes"] = "8192",
            ["Lanes:draft:MaxDrift"] = "2",
        });

        var first = await proxy.AskAsync("draft", question);
        Upstream.Handler = null;
        var second = await proxy.AskAsync("draft", question);

        Assert.Equal(502, first.Status);
        Assert.Contains("MaxResponseBytes", (await OpenAiError.ReadAsync(first.Response)).Message);
        Assert.Equal("miss", second.Cache);
        Assert.Equal(200, second.Status);
    }

    sealed class NoLength(byte[] bytes) : MemoryStream(bytes)
    {
        public override bool CanSeek => false;
    }
}
