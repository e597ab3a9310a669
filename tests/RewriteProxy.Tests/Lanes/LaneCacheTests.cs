using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>The semantic cache end to end over real sockets, against the scripted upstream.</summary>
public sealed class LaneCacheTests : UpstreamAndProxy
{
    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?>
    {
        ["Lanes:draft:MaxDrift"] = "0.9",
    };

    protected override void Script(ScriptedUpstream upstream)
    {
        // Drafts answer on topic, so the drift guard keeps them and the cache is what is under test.
        upstream.Completion = ScriptedUpstream.DraftAnswer;
    }

    [Fact]
    public async Task Second_identical_question_is_an_exact_hit_without_an_upstream_call()
    {
        var first = await Proxy.AskAsync("draft", "How many bikes can one member rent at once?");
        var second = await Proxy.AskAsync("draft", "how many bikes can one member  rent at once");

        Assert.Equal("miss", first.Cache);
        Assert.Equal("hit-exact", second.Cache);
        Assert.Equal(first.Content, second.Content);
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Lane_can_be_chosen_by_header_on_the_plain_chat_path()
    {
        var first = await Proxy.Client.PostLaneAsync("draft", LaneCalls.Request("Where do I return a rented kayak?"), viaHeader: true);
        var second = await Proxy.Client.PostLaneAsync("draft", LaneCalls.Request("Where do I return a rented kayak?"), viaHeader: true);

        Assert.Equal("miss", first.Cache);
        Assert.Equal("hit-exact", second.Cache);
        Assert.DoesNotContain("X-Rewrite-Lane", Upstream.Requests.Single().Headers.Keys, StringComparer.OrdinalIgnoreCase);
    }

    [Fact]
    public async Task Paraphrase_of_a_cached_question_is_a_semantic_hit()
    {
        var first = await Proxy.AskAsync("draft", "How do I reset the PIN of my library card?");
        var second = await Proxy.AskAsync("draft", "How can I reset my library card PIN?");

        Assert.Equal("miss", first.Cache);
        Assert.Equal("hit-semantic", second.Cache);
        Assert.Equal(first.Content, second.Content);
        var similarity = double.Parse(second.Header("X-Rewrite-Similarity")!, System.Globalization.CultureInfo.InvariantCulture);
        Assert.InRange(similarity, Proxy.Options.Lanes["draft"].HitSimilarity, 1.0);
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Theory]
    [InlineData("What was the total water consumption of the district in 2022?", "What was the total water consumption of the district in 2023?")]
    [InlineData("Is the gearbox covered by the warranty?", "Is the gearbox not covered by the warranty?")]
    [InlineData("What is the maximum speed on the harbour bridge?", "What is the minimum speed on the harbour bridge?")]
    [InlineData("Which permits are needed for pump model XR-200?", "Which permits are needed for pump model XR-300?")]
    public async Task Near_miss_question_is_not_served_from_the_cache(string cached, string asked)
    {
        await Proxy.AskAsync("draft", cached);
        var reply = await Proxy.AskAsync("draft", asked);

        Assert.Equal("miss", reply.Cache);
        Assert.Equal(2, Upstream.ChatCalls);
        Assert.Contains(asked, reply.Content);
    }

    [Fact]
    public async Task Tenants_never_see_each_others_entries()
    {
        await Proxy.AskAsync("draft", "What are the visiting hours of ward 3?", credential: "sk-tenant-a");
        var other = await Proxy.AskAsync("draft", "What are the visiting hours of ward 3?", credential: "sk-tenant-b");
        var same = await Proxy.AskAsync("draft", "What are the visiting hours of ward 3?", credential: "sk-tenant-a");

        Assert.Equal("miss", other.Cache);
        Assert.Equal("hit-exact", same.Cache);
        Assert.Equal(2, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Different_output_parameters_or_system_prompt_do_not_share_an_entry()
    {
        var q = "When is the recycling centre open?";
        await Proxy.Client.PostLaneAsync("draft", LaneCalls.Request(q));
        var warmer = LaneCalls.Request(q);
        warmer["temperature"] = 0.7;
        var otherSystem = LaneCalls.Request(q, system: "Answer in French.");
        var otherModel = LaneCalls.Request(q, model: "another-model");

        Assert.Equal("miss", (await Proxy.Client.PostLaneAsync("draft", warmer)).Cache);
        Assert.Equal("miss", (await Proxy.Client.PostLaneAsync("draft", otherSystem)).Cache);
        Assert.Equal("miss", (await Proxy.Client.PostLaneAsync("draft", otherModel)).Cache);
        Assert.Equal("miss", (await Proxy.AskAsync("siblings", q)).Cache);
        Assert.Equal("hit-exact", (await Proxy.Client.PostLaneAsync("draft", LaneCalls.Request(q))).Cache);
    }

    [Fact]
    public async Task No_cache_skips_the_lookup_and_stores_the_fresh_result()
    {
        var q = "How long is a day pass valid?";
        await Proxy.AskAsync("draft", q);
        Upstream.Completion = _ => "A draft answer: a day pass is valid for 24 hours from first use.";
        var fresh = await Proxy.AskAsync("draft", q, cacheControl: "no-cache");
        var after = await Proxy.AskAsync("draft", q);

        Assert.Equal("miss", fresh.Cache);
        Assert.Equal("hit-exact", after.Cache);
        Assert.Equal("A draft answer: a day pass is valid for 24 hours from first use.", after.Content);
        Assert.Equal(2, Upstream.ChatCalls);
    }

    [Fact]
    public async Task No_store_neither_looks_up_nor_stores()
    {
        var q = "Can I bring my dog on the ferry?";
        var first = await Proxy.AskAsync("draft", q, cacheControl: "no-store");
        var second = await Proxy.AskAsync("draft", q);

        Assert.Equal("bypass", first.Cache);
        Assert.Equal("miss", second.Cache);
        Assert.Equal(2, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Fifty_concurrent_identical_misses_make_exactly_one_upstream_call()
    {
        Upstream.Delay = TimeSpan.FromMilliseconds(500);
        var replies = await Task.WhenAll(Enumerable.Range(0, 50)
            .Select(_ => Proxy.AskAsync("draft", "Which documents do I need to enrol a child at Hillside school?")));

        Assert.Equal(1, Upstream.ChatCalls);
        Assert.All(replies, r => Assert.Equal(200, r.Status));
        Assert.Single(replies.Select(r => r.Content).Distinct());
    }

    [Fact]
    public async Task Unknown_lane_is_404_naming_the_configured_lanes()
    {
        var reply = await Proxy.AskAsync("summaries", "Anything?");

        Assert.Equal(404, reply.Status);
        var error = await OpenAiError.ReadAsync(reply.Response);
        Assert.Equal("unknown_lane", error.Code);
        Assert.Contains("draft, siblings", error.Message);
        Assert.Empty(Upstream.Requests);
    }

    [Fact]
    public async Task Malformed_json_is_400_and_nothing_goes_upstream()
    {
        using var response = await Proxy.Client.PostAsync("/lane/draft/v1/chat/completions",
            new StringContent("{\"model\": \"m\", \"messages\": [", System.Text.Encoding.UTF8, "application/json"));

        Assert.Equal(400, (int)response.StatusCode);
        Assert.Equal("invalid_request", (await OpenAiError.ReadAsync(response)).Code);
        Assert.Empty(Upstream.Requests);
    }

    [Fact]
    public async Task A_body_above_the_limit_is_413()
    {
        var big = LaneCalls.Request(new string('x', 2 << 20));
        var reply = await Proxy.Client.PostLaneAsync("draft", big);

        Assert.Equal(413, reply.Status);
        Assert.Equal("request_too_large", (await OpenAiError.ReadAsync(reply.Response)).Code);
    }

    [Theory]
    [InlineData("tools")]
    [InlineData("image")]
    [InlineData("n")]
    public async Task Requests_a_cache_cannot_stand_in_for_are_bypassed(string kind)
    {
        var body = LaneCalls.Request("What is the weather at the summit?");
        switch (kind)
        {
            case "tools":
                body["tools"] = new JsonArray(new JsonObject { ["type"] = "function", ["function"] = new JsonObject { ["name"] = "weather" } });
                break;
            case "image":
                body["messages"]![0]!["content"] = new JsonArray(
                    new JsonObject { ["type"] = "text", ["text"] = "What is this?" },
                    new JsonObject { ["type"] = "image_url", ["image_url"] = new JsonObject { ["url"] = "data:image/png;base64,AAAA" } });
                break;
            case "n":
                body["n"] = 3;
                break;
        }
        var first = await Proxy.Client.PostLaneAsync("draft", body);
        var second = await Proxy.Client.PostLaneAsync("draft", body);

        Assert.Equal("bypass", first.Cache);
        Assert.Equal("bypass", second.Cache);
        Assert.Equal(2, Upstream.ChatCalls);
        Assert.Equal(body.ToJsonString(), Upstream.Requests.Last().BodyText);
    }

    [Fact]
    public async Task Upstream_errors_are_relayed_and_never_cached()
    {
        Upstream.Handler = async (context, _) =>
        {
            context.Response.StatusCode = 429;
            context.Response.Headers["Retry-After"] = "3";
            await context.Response.WriteAsJsonAsync(new { error = new { message = "rate limited", type = "rate_limit", code = "rate_limited" } });
        };
        var first = await Proxy.AskAsync("draft", "Does the museum open on public holidays?");
        Upstream.Handler = null;
        var second = await Proxy.AskAsync("draft", "Does the museum open on public holidays?");

        Assert.Equal(429, first.Status);
        Assert.Equal("3", first.Response.Headers.RetryAfter!.ToString());
        Assert.Equal("miss", second.Cache);
        Assert.Equal(200, second.Status);
    }

    [Fact]
    public async Task Invalid_upstream_json_is_502_and_never_cached()
    {
        Upstream.Handler = (context, _) => context.Response.WriteAsync("{\"choices\": [ {\"message\": ");
        var first = await Proxy.AskAsync("draft", "How deep is the north reservoir?");
        Upstream.Handler = null;
        var second = await Proxy.AskAsync("draft", "How deep is the north reservoir?");

        Assert.Equal(502, first.Status);
        Assert.Equal("upstream_invalid_response", (await OpenAiError.ReadAsync(first.Response)).Code);
        Assert.Equal("miss", second.Cache);
    }

    [Fact]
    public async Task Streamed_hits_and_misses_carry_the_same_content_as_json()
    {
        var miss = await Proxy.AskAsync("draft", "What should I pack for the glacier hike?", stream: true);
        var hit = await Proxy.AskAsync("draft", "What should I pack for the glacier hike?", stream: true);
        var json = await Proxy.AskAsync("draft", "What should I pack for the glacier hike?");

        Assert.Equal("text/event-stream", miss.Response.Content.Headers.ContentType!.MediaType);
        Assert.Equal("miss", miss.Cache);
        Assert.Equal("hit-exact", hit.Cache);
        Assert.Equal(json.Content, miss.Content);
        Assert.Equal(json.Content, hit.Content);
        Assert.EndsWith("data: [DONE]\n\n", hit.Body);
        // The upstream is asked without streaming: the proxy guards the whole answer first.
        Assert.Null(Upstream.Requests.Single().Json!["stream"]);
    }
}
