using System.Text.Json.Nodes;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Clients;

/// <summary>
/// The official provider clients, unmodified, pointed at the proxy's lanes: the `openai` npm package (chat
/// completions, the Responses API, and its AzureOpenAI client on deployment paths) and `@anthropic-ai/sdk` (the
/// Messages API). Each parses our answers, JSON and streamed, exactly as it parses the provider's.
/// </summary>
public sealed class ProviderClientTests : UpstreamAndProxy
{
    const string Question = "How do I cancel my gym membership?";
    const string Paraphrase = "How can I cancel my gym membership?";

    static readonly string[] OnTopic =
    [
        "What is the notice period for ending a gym membership?",
        "Can I cancel a gym contract online?",
        "Is there a fee for cancelling a membership early?",
    ];
    const string OffTopic = "What is the tallest mountain in Africa?";

    static string Draft(string question) => "A draft answer: to end it, " + question.TrimEnd('?').ToLowerInvariant() + " by writing to the front desk.";

    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?> { ["Lanes:draft:MaxDrift"] = "2" };

    protected override void Script(ScriptedUpstream upstream) =>
        upstream.Handler = ProviderAnswers.Handler(q => q.Contains("related", StringComparison.OrdinalIgnoreCase) || q.StartsWith("Siblings:", StringComparison.Ordinal)
            ? string.Join("\n", OnTopic.Append(OffTopic))
            : Draft(q));

    static JsonObject Call(string api, string question, bool stream, string model = "scripted-model") =>
        new() { ["api"] = api, ["question"] = question, ["stream"] = stream, ["model"] = model };

    int CallsTo(string suffix) => Upstream.Requests.Count(r => r.Path.EndsWith(suffix, StringComparison.Ordinal));

    static void AssertDraftSeries(JsonArray results, string clientName)
    {
        string[] expected = ["miss", "hit-exact", "hit-exact", "hit-semantic"];
        for (var i = 0; i < expected.Length; i++)
        {
            var r = results[i]!;
            Assert.True(r["error"] is null, $"{clientName} call {i}: {r["error"]}");
            Assert.Equal(200, r["status"]!.GetValue<int>());
            Assert.Equal(expected[i], r["headers"]!["x-rewrite-cache"]!.GetValue<string>());
            Assert.Equal(Draft(Question), r["text"]!.GetValue<string>());
        }
    }

    [Fact]
    public async Task Openai_npm_client_on_the_responses_api_gets_misses_exact_and_semantic_hits_json_and_streamed()
    {
        var spec = new JsonObject
        {
            ["baseURL"] = new Uri(Proxy.Root, "lane/draft/v1").ToString(),
            ["apiKey"] = "sk-tenant-a",
            ["calls"] = new JsonArray(Call("responses", Question, false), Call("responses", Question, false),
                Call("responses", Question, true), Call("responses", Paraphrase, true)),
        };

        var results = await NodeClients.RunAsync("openai-calls.mjs", spec);

        AssertDraftSeries(results, $"openai {NodeClients.VersionOf("openai")} responses.create");
        // The streamed hit is the API's event sequence, ending with the whole response.
        var streamed = results[2]!;
        Assert.Equal("response.created", streamed["types"]![0]!.GetValue<string>());
        Assert.Equal("response.completed", streamed["types"]!.AsArray().Last()!.GetValue<string>());
        Assert.Equal(Draft(Question), streamed["completedText"]!.GetValue<string>());
        Assert.Equal(1, CallsTo("/v1/responses"));
    }

    [Fact]
    public async Task Anthropic_npm_client_on_the_messages_api_gets_misses_exact_and_semantic_hits_json_and_streamed()
    {
        var spec = new JsonObject
        {
            ["baseURL"] = new Uri(Proxy.Root, "lane/draft").ToString().TrimEnd('/'),
            ["apiKey"] = "sk-ant-tenant-a",
            ["calls"] = new JsonArray(Call("messages", Question, false), Call("messages", Question, false),
                Call("messages", Question, true), Call("messages", Paraphrase, true)),
        };

        var results = await NodeClients.RunAsync("anthropic-calls.mjs", spec);

        AssertDraftSeries(results, $"@anthropic-ai/sdk {NodeClients.VersionOf("@anthropic-ai/sdk")} messages.create/stream");
        var streamed = results[2]!;
        Assert.Equal("message_start", streamed["types"]![0]!.GetValue<string>());
        Assert.Equal("message_stop", streamed["types"]!.AsArray().Last()!.GetValue<string>());
        Assert.Equal(Draft(Question), streamed["finalText"]!.GetValue<string>());
        Assert.Equal(1, CallsTo("/v1/messages"));
        var seen = Upstream.Requests.Single(r => r.Path.EndsWith("/v1/messages", StringComparison.Ordinal));
        // This client version sends its key as a bearer token; earlier ones used x-api-key. Either way it reaches the provider.
        Assert.Contains("sk-ant-tenant-a", seen.Headers.GetValueOrDefault("x-api-key") ?? seen.Headers.GetValueOrDefault("Authorization") ?? "");
        Assert.False(seen.Json!["stream"]?.GetValue<bool>() ?? false);
    }

    [Theory]
    [InlineData("openai-calls.mjs", "responses")]
    [InlineData("anthropic-calls.mjs", "messages")]
    [InlineData("openai-calls.mjs", "chat")]
    public async Task A_siblings_lane_drops_the_off_topic_line_in_every_format_and_a_streamed_repeat_is_a_hit(string script, string api)
    {
        var root = api == "messages" ? "lane/siblings" : "lane/siblings/v1";
        var question = "Siblings: " + Question;
        var spec = new JsonObject
        {
            ["baseURL"] = new Uri(Proxy.Root, root).ToString().TrimEnd('/'),
            ["apiKey"] = "sk-tenant-b",
            ["calls"] = new JsonArray(Call(api, question, false), Call(api, question, true)),
        };

        var results = await NodeClients.RunAsync(script, spec);

        Assert.Equal(["miss", "hit-exact"], results.Select(r => r!["headers"]!["x-rewrite-cache"]!.GetValue<string>()));
        foreach (var r in results)
        {
            // Kept lines come in the guard's order (most relevant and diverse first), so compare as sets.
            Assert.Equal(OnTopic.Order(), r!["text"]!.GetValue<string>().Split('\n').Order());
            Assert.Equal("1", r["headers"]!["x-rewrite-dropped"]!.GetValue<string>());
        }
    }

    [Fact]
    public async Task Openai_npm_client_probing_with_only_if_cached_gets_an_api_error_504_on_a_miss_and_the_entry_on_a_hit()
    {
        // The header goes through the client's per-request `headers` option, as an app would send it. The client keeps
        // its default of 2 retries on a 5xx: the 504's `x-should-retry: false` is what keeps a probe to one request.
        static JsonObject Probe(string question, bool stream)
        {
            var call = Call("chat", question, stream);
            call["headers"] = new JsonObject { ["Cache-Control"] = "only-if-cached" };
            return call;
        }
        const string uncached = "Can I freeze my gym membership for a month?";
        var spec = new JsonObject
        {
            ["baseURL"] = new Uri(Proxy.Root, "lane/draft/v1").ToString(),
            ["apiKey"] = "sk-tenant-a",
            ["maxRetries"] = 2,
            ["calls"] = new JsonArray(Probe(uncached, false), Probe(uncached, true), Call("chat", Question, false), Probe(Question, true)),
        };

        var results = await NodeClients.RunAsync("openai-calls.mjs", spec);

        var client = $"openai {NodeClients.VersionOf("openai")}";
        foreach (var miss in results.Take(2))
        {
            Assert.True(miss!["apiError"]?.GetValue<bool>(), $"{client}: expected an APIError, got {miss.ToJsonString()}");
            Assert.Equal(504, miss["status"]!.GetValue<int>());
            Assert.Equal("only_if_cached", miss["code"]!.GetValue<string>());
            Assert.Equal("probe-miss", miss["headers"]!["x-rewrite-cache"]!.GetValue<string>());
            Assert.Equal(1, miss["attempts"]!.GetValue<int>());
        }
        var hit = results[3]!;
        Assert.True(hit["error"] is null, $"{client}: {hit["error"]}");
        Assert.Equal("hit-exact", hit["headers"]!["x-rewrite-cache"]!.GetValue<string>());
        Assert.Equal(Draft(Question), hit["text"]!.GetValue<string>());
        Assert.Equal(1, CallsTo("/chat/completions"));
    }
}
