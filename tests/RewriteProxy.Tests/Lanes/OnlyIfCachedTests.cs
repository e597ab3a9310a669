using System.Net.Http.Headers;
using System.Text;
using System.Text.Json.Nodes;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Embedding;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// <c>Cache-Control: only-if-cached</c> on lane calls, as RFC 9111 §5.2.1.7 defines it: "the client only wishes to
/// obtain a stored response"; a cache that honours it responds "with either a stored response ... or a 504 (Gateway
/// Timeout) status code". The scripted upstream counts every call it gets: a probe must never reach it.
/// </summary>
public sealed class OnlyIfCachedTests : UpstreamAndProxy
{
    const string OnlyIfCached = "only-if-cached";
    const string AdminToken = "probe-tests-admin-token";
    /// <summary>A lane of this class's own: prometheus-net's series are process-wide.</summary>
    const string ProbeLane = "probe";

    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?>
    {
        ["Lanes:draft:MaxDrift"] = "0.9",
        [$"Lanes:{ProbeLane}:Kind"] = "draft",
        [$"Lanes:{ProbeLane}:MaxDrift"] = "0.9",
        ["Admin:Token"] = AdminToken,
    };

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    static async Task AssertProbeMissAsync(LaneReply reply)
    {
        Assert.Equal(504, reply.Status);
        Assert.Equal("probe-miss", reply.Cache);
        Assert.Equal("false", reply.Header("x-should-retry"));
        var error = await OpenAiError.ReadAsync(reply.Response);
        Assert.Equal("only_if_cached", error.Code);
        Assert.Contains("only-if-cached", error.Message);
        Assert.Contains("upstream was not asked", error.Message);
    }

    [Fact]
    public async Task A_cached_question_is_served_to_a_probe_exactly_and_semantically_without_another_upstream_call()
    {
        var miss = await Proxy.AskAsync("draft", "How do I reset the PIN of my library card?");
        var exact = await Proxy.AskAsync("draft", "How do I reset the PIN of my library card?", cacheControl: OnlyIfCached);
        var semantic = await Proxy.AskAsync("draft", "How can I reset my library card PIN?", cacheControl: OnlyIfCached);

        Assert.Equal("miss", miss.Cache);
        Assert.Equal((200, "hit-exact"), (exact.Status, exact.Cache));
        Assert.Equal((200, "hit-semantic"), (semantic.Status, semantic.Cache));
        Assert.Equal(miss.Content, exact.Content);
        Assert.Equal(miss.Content, semantic.Content);
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task A_probe_for_an_uncached_question_is_answered_504_without_an_upstream_call_and_stores_nothing()
    {
        const string question = "Which bins take garden waste?";
        var probe = await Proxy.AskAsync("draft", question, cacheControl: OnlyIfCached);

        await AssertProbeMissAsync(probe);
        Assert.Equal(0, Upstream.ChatCalls);
        // Nothing was stored by the probe: the next ordinary call is a miss.
        Assert.Equal("miss", (await Proxy.AskAsync("draft", question)).Cache);
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task A_streamed_probe_is_answered_504_on_a_miss_and_with_the_streamed_hit_once_cached()
    {
        const string question = "When does the outdoor pool open for the season?";
        var before = await Proxy.AskAsync("draft", question, stream: true, cacheControl: OnlyIfCached);
        await AssertProbeMissAsync(before);
        Assert.Equal(0, Upstream.ChatCalls);

        var miss = await Proxy.AskAsync("draft", question);
        var hit = await Proxy.AskAsync("draft", question, stream: true, cacheControl: OnlyIfCached);

        Assert.Equal((200, "hit-exact"), (hit.Status, hit.Cache));
        Assert.Equal("text/event-stream", hit.Response.Content.Headers.ContentType?.MediaType);
        Assert.EndsWith("data: [DONE]", hit.Body.TrimEnd());
        Assert.Equal(miss.Content, hit.Content);
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task A_probe_of_a_call_the_cache_cannot_answer_is_answered_504_without_an_upstream_call()
    {
        var body = LaneCalls.Request("What will the weather be at the regatta?");
        body["tools"] = new JsonArray(new JsonObject { ["type"] = "function", ["function"] = new JsonObject { ["name"] = "weather" } });

        var probe = await Proxy.Client.PostLaneAsync("draft", body, cacheControl: OnlyIfCached);

        await AssertProbeMissAsync(probe);
        Assert.Equal("tools", probe.Header("X-Rewrite-Bypass"));
        Assert.Empty(Upstream.Requests);
    }

    [Fact]
    public async Task An_unlocated_probe_is_served_an_exact_repeat_and_answered_504_when_only_a_paraphrase_is_cached()
    {
        // Several lines, no marker, no template: the question cannot be told apart, so only the whole message is looked up.
        static string Prompt(string q) => $"Our riders ask about the tram network.\n{q}\nAnswer with a short draft.";
        var miss = await Proxy.AskAsync("draft", Prompt("Do trams run after midnight?"));
        var paraphrase = await Proxy.AskAsync("draft", Prompt("Are trams running after midnight?"), cacheControl: OnlyIfCached);
        var repeat = await Proxy.AskAsync("draft", Prompt("Do trams run after midnight?"), cacheControl: OnlyIfCached);

        Assert.Equal("unlocated", miss.Header("X-Rewrite-Question"));
        Assert.Equal("unlocated", paraphrase.Header("X-Rewrite-Question"));
        await AssertProbeMissAsync(paraphrase);
        Assert.Equal((200, "hit-exact"), (repeat.Status, repeat.Cache));
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Theory]
    [InlineData("no-cache, only-if-cached")]
    [InlineData("only-if-cached, no-store")]
    public async Task A_probe_that_also_forbids_the_cache_is_answered_504_even_when_the_answer_is_cached(string cacheControl)
    {
        // no-cache: a stored answer needs validating with the origin first (RFC 9111 §5.2.1.4), which only-if-cached
        // forbids; no-store: this proxy neither looks up nor stores. Either way nothing may answer.
        const string question = "Can I pay the parking fine online?";
        await Proxy.AskAsync("draft", question);

        await AssertProbeMissAsync(await Proxy.AskAsync("draft", question, cacheControl: cacheControl));
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Directive_names_are_read_case_insensitively_among_other_directives()
    {
        // RFC 9111 §5.2: "Cache directives are identified by a token, to be compared case-insensitively".
        var probe = await Proxy.AskAsync("draft", "Is the museum open on public holidays?", cacheControl: "max-age=0, Only-If-Cached");

        await AssertProbeMissAsync(probe);
        Assert.Equal(0, Upstream.ChatCalls);
    }

    [Fact]
    public async Task A_probe_on_a_failing_cache_is_answered_504_and_counted_as_a_fail_open_without_an_upstream_call()
    {
        var embedder = new FaultyEmbedder(SharedEmbedder.Instance) { Fail = FaultyEmbedder.Mode.Always };
        await using var proxy = await StartProxyAsync(new Dictionary<string, string?> { ["Lanes:draft:MaxDrift"] = "0.9" },
            services => services.AddSingleton<IEmbedder>(embedder));
        async Task<double> FailOpenAsync() =>
            (await MetricsExposition.ScrapeAsync(proxy.Client)).Sum("rewriteproxy_fail_open_total", ("reason", "embedder"));
        var before = await FailOpenAsync();

        var probe = await proxy.AskAsync("draft", "Where can I charge an electric car in the old town?", cacheControl: OnlyIfCached);

        await AssertProbeMissAsync(probe);
        Assert.Equal(0, Upstream.ChatCalls);
        Assert.Equal(before + 1, await FailOpenAsync());
    }

    [Fact]
    public async Task A_probe_in_the_messages_format_gets_its_504_in_anthropics_error_shape()
    {
        var body = new JsonObject
        {
            ["model"] = "c1", ["max_tokens"] = 200,
            ["messages"] = new JsonArray(new JsonObject { ["role"] = "user", ["content"] = "Where do I renew a parking permit?" }),
        };
        using var request = new HttpRequestMessage(HttpMethod.Post, "/lane/draft/v1/messages")
        {
            Content = new StringContent(body.ToJsonString(), Encoding.UTF8, "application/json"),
        };
        request.Headers.Add("anthropic-version", "2023-06-01");
        request.Headers.CacheControl = new CacheControlHeaderValue { OnlyIfCached = true };

        using var response = await Proxy.Client.SendAsync(request);
        var error = JsonNode.Parse(await response.Content.ReadAsStringAsync())!;

        Assert.Equal(504, (int)response.StatusCode);
        Assert.Equal("probe-miss", string.Join(",", response.Headers.GetValues("X-Rewrite-Cache")));
        // Anthropic's documented error shape: {"type":"error","error":{"type":...,"message":...}}.
        Assert.Equal("error", error["type"]!.GetValue<string>());
        Assert.Equal("timeout_error", error["error"]!["type"]!.GetValue<string>());
        Assert.Contains("only-if-cached", error["error"]!["message"]!.GetValue<string>());
        Assert.Empty(Upstream.Requests);
    }

    [Fact]
    public async Task Probes_count_apart_from_hits_and_leave_the_entrys_hit_count_and_the_tokens_saved_as_they_were()
    {
        const string question = "How many books can I borrow at once?";
        await Proxy.AskAsync(ProbeLane, question);
        var before = await MetricsExposition.ScrapeAsync(Proxy.Client);

        Assert.Equal(200, (await Proxy.AskAsync(ProbeLane, question, cacheControl: OnlyIfCached)).Status);
        Assert.Equal(504, (await Proxy.AskAsync(ProbeLane, "Can I return books at another branch?", cacheControl: OnlyIfCached)).Status);
        var afterProbes = await MetricsExposition.ScrapeAsync(Proxy.Client);
        Assert.Equal("hit-exact", (await Proxy.AskAsync(ProbeLane, question)).Cache);
        var afterHit = await MetricsExposition.ScrapeAsync(Proxy.Client);

        double Delta(MetricsExposition from, MetricsExposition to, string series, params (string, string)[] labels) =>
            to.Sum(series, [("lane", ProbeLane), .. labels]) - from.Sum(series, [("lane", ProbeLane), .. labels]);
        const string lookups = "rewriteproxy_lookups_total";
        Assert.Equal(1, Delta(before, afterProbes, lookups, ("result", "probe_hit")));
        Assert.Equal(1, Delta(before, afterProbes, lookups, ("result", "probe_miss")));
        Assert.Equal(0, Delta(before, afterProbes, lookups, ("result", "hit_exact")));
        Assert.Equal(0, Delta(before, afterProbes, lookups, ("result", "miss")));
        Assert.Equal(0, Delta(before, afterProbes, "rewriteproxy_tokens_saved_total"));
        // The ordinary hit after them counts as one, which shows the counts above could move.
        Assert.Equal(1, Delta(afterProbes, afterHit, lookups, ("result", "hit_exact")));
        Assert.True(Delta(afterProbes, afterHit, "rewriteproxy_tokens_saved_total") > 0);
        // Hits are recorded in the background, in order: once the ordinary hit is there, a probe's would be too.
        Assert.Equal(1, await HitCountOnceRecordedAsync(question));
        Assert.Equal(1, Upstream.ChatCalls);
    }

    /// <summary>The entry's hit count from /admin/entries, once it is above zero (or after 10 s).</summary>
    async Task<long> HitCountOnceRecordedAsync(string question)
    {
        var deadline = DateTime.UtcNow + TimeSpan.FromSeconds(10);
        while (true)
        {
            using var request = new HttpRequestMessage(HttpMethod.Get, $"/admin/entries?lane={ProbeLane}&q={Uri.EscapeDataString(question)}");
            request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", AdminToken);
            using var response = await Proxy.Client.SendAsync(request);
            var listed = JsonNode.Parse(await response.Content.ReadAsStringAsync())!;
            var count = listed["entries"]!.AsArray().Single()!["hitCount"]!.GetValue<long>();
            if (count > 0 || DateTime.UtcNow > deadline) return count;
            await Task.Delay(50);
        }
    }
}
