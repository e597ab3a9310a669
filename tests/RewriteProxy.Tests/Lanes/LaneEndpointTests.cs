using System.Text;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Lanes;
using RewriteProxy.Tests.Fixtures;
using RewriteProxy.Wire;
using RewriteProxy.Wire.Messages;
using RewriteProxy.Wire.Responses;

namespace RewriteProxy.Tests.Lanes;

/// <summary>Which paths are lane calls in which format, where they go upstream, and what the scope takes from the endpoint.</summary>
public sealed class LaneEndpointTests : UpstreamAndProxy
{
    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?> { ["Lanes:draft:MaxDrift"] = "2" };

    protected override void Script(ScriptedUpstream upstream) => upstream.Handler = ProviderAnswers.Handler(q => "A draft answer: " + q);

    [Theory]
    [InlineData("/v1/chat/completions", "chat", "/chat/completions", null)]
    [InlineData("/v1/responses", "responses", "/responses", null)]
    [InlineData("/v1/messages", "messages", "/messages", null)]
    [InlineData("/openai/deployments/gpt-4o-mini/chat/completions", "chat", "/openai/deployments/gpt-4o-mini/chat/completions", "gpt-4o-mini")]
    [InlineData("/openai/deployments/my%20dep/chat/completions", "chat", "/openai/deployments/my%20dep/chat/completions", "my dep")]
    [InlineData("/openai/v1/chat/completions", "chat", "/openai/v1/chat/completions", null)]
    [InlineData("/openai/responses", "responses", "/openai/responses", null)]
    [InlineData("/openai/v1/responses", "responses", "/openai/v1/responses", null)]
    public void Lane_paths_name_their_format_and_upstream_path(string path, string format, string upstream, string? model)
    {
        var endpoint = LaneEndpoint.Match(path, QueryString.Empty)!;

        Assert.Equal(format, endpoint.Format.Name);
        Assert.Equal(upstream, endpoint.UpstreamPath);
        Assert.Equal(model, endpoint.PathModel);
    }

    [Theory]
    [InlineData("/v1/embeddings")]
    [InlineData("/v1/chat/completions/extra")]
    [InlineData("/openai/deployments/d/embeddings")]
    [InlineData("/openai/deployments//chat/completions")]
    [InlineData("/v2/chat/completions")]
    public void Other_paths_are_not_lane_calls(string path) => Assert.Null(LaneEndpoint.Match(path, QueryString.Empty));

    [Fact]
    public void The_query_is_part_of_the_scope_text_whatever_its_order()
    {
        var a = LaneEndpoint.Match("/openai/responses", new QueryString("?api-version=1&x=2"))!;
        var b = LaneEndpoint.Match("/openai/responses", new QueryString("?x=2&api-version=1"))!;
        var c = LaneEndpoint.Match("/openai/responses", new QueryString("?api-version=2&x=2"))!;

        Assert.Equal(a.ScopeText, b.ScopeText);
        Assert.NotEqual(a.ScopeText, c.ScopeText);
    }

    async Task<LaneReply> PostAsync(string path, JsonObject body, params (string Name, string Value)[] headers)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, path)
        {
            Content = new StringContent(body.ToJsonString(), Encoding.UTF8, "application/json"),
        };
        request.Headers.TryAddWithoutValidation("Authorization", "Bearer sk-tenant-a");
        foreach (var (name, value) in headers) request.Headers.TryAddWithoutValidation(name, value);
        var response = await Proxy.Client.SendAsync(request);
        return new LaneReply(response, await response.Content.ReadAsStringAsync());
    }

    static JsonObject Responses(string question) => new() { ["model"] = "m1", ["input"] = question };

    static JsonObject Messages(string question) => new()
    {
        ["model"] = "c1", ["max_tokens"] = 200, ["messages"] = new JsonArray(new JsonObject { ["role"] = "user", ["content"] = question }),
    };

    [Fact]
    public async Task The_lane_header_makes_a_responses_or_messages_call_a_lane_call()
    {
        var responses = await PostAsync("/v1/responses", Responses("Where do I renew a parking permit?"), ("X-Rewrite-Lane", "draft"));
        var messages = await PostAsync("/v1/messages", Messages("Where do I renew a parking permit?"), ("X-Rewrite-Lane", "draft"));
        var plain = await PostAsync("/v1/responses", Responses("Where do I renew a parking permit?"));

        Assert.Equal("miss", responses.Cache);
        Assert.Equal("miss", messages.Cache);
        Assert.Null(plain.Header("X-Rewrite-Cache"));
        // The lane header never reaches the provider.
        Assert.All(Upstream.Requests, r => Assert.False(r.Headers.ContainsKey("X-Rewrite-Lane")));
    }

    [Fact]
    public async Task The_anthropic_version_header_is_part_of_the_scope()
    {
        const string question = "How long is a parking permit valid?";
        var first = await PostAsync("/lane/draft/v1/messages", Messages(question), ("anthropic-version", "2023-06-01"));
        var same = await PostAsync("/lane/draft/v1/messages", Messages(question), ("anthropic-version", "2023-06-01"));
        var other = await PostAsync("/lane/draft/v1/messages", Messages(question), ("anthropic-version", "2099-01-01"));

        Assert.Equal(["miss", "hit-exact", "miss"], new[] { first.Cache, same.Cache, other.Cache });
        Assert.Equal("2023-06-01", Upstream.Requests.First().Headers["anthropic-version"]);
    }

    [Fact]
    public async Task A_responses_call_that_continues_a_stored_response_is_bypassed_to_the_same_path()
    {
        var body = Responses("And what about weekends?");
        body["previous_response_id"] = "resp_earlier";

        var reply = await PostAsync("/lane/draft/v1/responses", body);

        Assert.Equal("bypass", reply.Cache);
        Assert.Equal("previous_response", reply.Header("X-Rewrite-Bypass"));
        var seen = Assert.Single(Upstream.Requests);
        Assert.Equal("/v1/responses", seen.Path);
        Assert.Equal("resp_earlier", seen.Json!["previous_response_id"]!.GetValue<string>());
    }

    [Fact]
    public async Task A_bad_messages_body_is_a_400_in_anthropics_error_shape()
    {
        var reply = await PostAsync("/lane/draft/v1/messages", new JsonObject { ["model"] = "c1", ["max_tokens"] = 10 });

        Assert.Equal(400, reply.Status);
        var error = JsonNode.Parse(reply.Body)!;
        Assert.Equal("error", error["type"]!.GetValue<string>());
        Assert.Equal("invalid_request_error", error["error"]!["type"]!.GetValue<string>());
        Assert.Empty(Upstream.Requests);
    }

    [Fact]
    public async Task Other_calls_below_a_lane_pass_through_and_an_unknown_lane_is_404()
    {
        using var models = await Proxy.Client.GetAsync("/lane/draft/v1/models");
        var unknown = await PostAsync("/lane/nope/v1/responses", Responses("q"));

        Assert.Equal(200, (int)models.StatusCode);
        Assert.Equal("/v1/models", Upstream.Requests.Single().Path);
        Assert.Equal(404, unknown.Status);
        Assert.Contains("unknown_lane", unknown.Body);
    }
}
