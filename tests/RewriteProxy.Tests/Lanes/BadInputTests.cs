using System.Diagnostics;
using System.Net.Http.Headers;
using System.Text;
using System.Text.Json.Nodes;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// What clients and upstreams may send that the proxy must survive: wrong types, deep nesting, invalid UTF-8, bodies
/// at the size limit, tool traffic, and absurd completions. Never a 500, never a poisoned entry.
/// </summary>
public sealed class BadInputTests : UpstreamAndProxy
{
    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?>
    {
        ["Limits:MaxRequestBytes"] = MaxRequestBytes.ToString(),
        ["Lanes:draft:MaxDrift"] = "0.9",
    };

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    /// <summary>Small, so "just under" and "over" bodies stay cheap; OptionsReader's floor is 1024.</summary>
    const int MaxRequestBytes = 64 * 1024;
    /// <summary>
    /// Longest an absurd completion may take to be judged and answered. Common practice: well inside the clients'
    /// own request timeouts (the OpenAI SDK's default is about 100 s, from memory), so the client never gives up first.
    /// </summary>
    static readonly TimeSpan AbsurdCompletionBudget = TimeSpan.FromSeconds(30);

    async Task<HttpResponseMessage> PostRawAsync(byte[] body, bool chunked = false)
    {
        HttpContent content = chunked ? new StreamContent(new NonSeekable(body)) : new ByteArrayContent(body);
        content.Headers.ContentType = new MediaTypeHeaderValue("application/json");
        return await Proxy.Client.PostAsync("/lane/draft/v1/chat/completions", content);
    }

    async Task AssertErrorAsync(HttpResponseMessage response, int status, string code)
    {
        Assert.Equal(status, (int)response.StatusCode);
        Assert.Equal(code, (await OpenAiError.ReadAsync(response)).Code);
    }

    [Theory]
    [InlineData("{\"model\": 5, \"messages\": [{\"role\":\"user\",\"content\":\"hi?\"}]}")]
    [InlineData("{\"model\": \"m\", \"messages\": \"x\"}")]
    [InlineData("{\"model\": \"m\", \"messages\": [{\"role\":\"user\",\"content\":\"hi?\"}], \"stream\": \"yes\"}")]
    [InlineData("{\"model\": \"m\", \"messages\": []}")]
    [InlineData("{\"model\": \"m\", \"messages\": [5]}")]
    [InlineData("{\"model\": \"m\", \"messages\": [{\"role\": 1, \"content\": \"hi?\"}]}")]
    [InlineData("[1, 2, 3]")]
    [InlineData("\"just a string\"")]
    [InlineData("")]
    public async Task Wrong_shapes_and_types_are_400_and_nothing_goes_upstream(string json)
    {
        using var response = await PostRawAsync(Encoding.UTF8.GetBytes(json));

        await AssertErrorAsync(response, 400, "invalid_request");
        Assert.Empty(Upstream.Requests);
    }

    [Theory]
    [InlineData("[5]")]
    [InlineData("[\"text\"]")]
    [InlineData("[null]")]
    [InlineData("[[]]")]
    [InlineData("{\"type\":\"text\"}")]
    public async Task Content_parts_that_are_not_objects_are_answered_without_a_500(string content)
    {
        var json = $"{{\"model\":\"m\",\"messages\":[{{\"role\":\"user\",\"content\":{content}}}]}}";
        using var response = await PostRawAsync(Encoding.UTF8.GetBytes(json));

        // The content is odd but the JSON is a chat request: a 400, or a bypass to the upstream, are both fine.
        Assert.NotEqual(500, (int)response.StatusCode);
        Assert.True((int)response.StatusCode is 200 or 400, $"status {(int)response.StatusCode}");
    }

    [Fact]
    public async Task Duplicate_member_names_are_400()
    {
        // RFC 8259 §4: names within an object SHOULD be unique; with duplicates, receivers behave unpredictably.
        var json = "{\"model\":\"a\",\"model\":\"b\",\"messages\":[{\"role\":\"user\",\"content\":\"Where is the pool?\"}]}";
        using var response = await PostRawAsync(Encoding.UTF8.GetBytes(json));

        await AssertErrorAsync(response, 400, "invalid_request");
    }

    [Theory]
    [InlineData("\\ud800")]
    [InlineData("\\udc00\\u0000")]
    public async Task A_lone_surrogate_escape_in_a_message_is_not_a_500(string escape)
    {
        // RFC 8259 §8.2: an escaped lone surrogate is valid JSON syntax, but not a Unicode string.
        var json = "{\"model\":\"m\",\"messages\":[{\"role\":\"system\",\"content\":\"Be brief." + escape +
                   "\"},{\"role\":\"user\",\"content\":\"Where is the pool?\"}]}";
        using var response = await PostRawAsync(Encoding.UTF8.GetBytes(json));

        Assert.True((int)response.StatusCode is 200 or 400, $"status {(int)response.StatusCode}");
    }

    [Fact]
    public async Task Nesting_ten_thousand_deep_is_400_not_a_stack_overflow()
    {
        var nested = new string('[', 10_000) + new string(']', 10_000);
        var json = "{\"model\":\"m\",\"messages\":[{\"role\":\"user\",\"content\":\"hi?\"}],\"metadata\":" + nested + "}";
        using var response = await PostRawAsync(Encoding.UTF8.GetBytes(json));

        await AssertErrorAsync(response, 400, "invalid_request");
        Assert.Equal(200, (await Proxy.AskAsync("draft", "Is the proxy still up after deep nesting?")).Status);
    }

    [Theory]
    [InlineData(new byte[] { 0xC3, 0x28 })]             // RFC 3629 §3: 0xC3 must be followed by a continuation byte
    [InlineData(new byte[] { 0xFF })]                   // never valid in UTF-8
    [InlineData(new byte[] { 0xED, 0xA0, 0x80 })]       // an encoded surrogate (U+D800), excluded by RFC 3629 §3
    [InlineData(new byte[] { 0xC0, 0xAF })]             // an overlong '/', excluded by RFC 3629 §3
    public async Task Invalid_utf8_in_the_body_is_400(byte[] bad)
    {
        var before = Encoding.UTF8.GetBytes("{\"model\":\"m\",\"messages\":[{\"role\":\"user\",\"content\":\"Where is ");
        var after = Encoding.UTF8.GetBytes("?\"}]}");
        using var response = await PostRawAsync([.. before, .. bad, .. after]);

        await AssertErrorAsync(response, 400, "invalid_request");
        Assert.Empty(Upstream.Requests);
    }

    [Theory]
    [InlineData(false)]
    [InlineData(true)]
    public async Task A_body_just_under_the_limit_is_served_and_one_just_over_is_413(bool chunked)
    {
        var question = "Which forms does the harbour office need for a mooring?";
        byte[] Body(int size)
        {
            var request = LaneCalls.Request(question);
            request["metadata"] = new JsonObject { ["pad"] = "" };
            var overhead = Encoding.UTF8.GetByteCount(request.ToJsonString());
            request["metadata"]!["pad"] = new string('p', size - overhead);
            var bytes = Encoding.UTF8.GetBytes(request.ToJsonString());
            Assert.Equal(size, bytes.Length);
            return bytes;
        }

        using var under = await PostRawAsync(Body(MaxRequestBytes), chunked);
        using var over = await PostRawAsync(Body(MaxRequestBytes + 1), chunked);

        Assert.Equal(200, (int)under.StatusCode);
        await AssertErrorAsync(over, 413, "request_too_large");
        Assert.Single(Upstream.Requests);
    }

    [Fact]
    public async Task Tool_calls_in_the_conversation_are_bypassed_and_forwarded_untouched()
    {
        var body = JsonNode.Parse("""
            {"model":"m","messages":[
              {"role":"user","content":"What is the tide at noon?"},
              {"role":"assistant","content":null,"tool_calls":[{"id":"call_1","type":"function","function":{"name":"tide","arguments":"{}"}}]},
              {"role":"tool","tool_call_id":"call_1","content":"2.1 m"},
              {"role":"user","content":"And at six?"}]}
            """)!.AsObject();

        var first = await Proxy.Client.PostLaneAsync("draft", body);
        var second = await Proxy.Client.PostLaneAsync("draft", body);

        Assert.Equal(["bypass", "bypass"], new[] { first.Cache, second.Cache });
        Assert.Equal("tools", first.Header("X-Rewrite-Bypass"));
        Assert.Equal(2, Upstream.ChatCalls);
        Assert.Equal(body.ToJsonString(), Upstream.Requests.Last().BodyText);
    }

    [Fact]
    public async Task Ten_thousand_sibling_lines_give_a_bounded_correct_answer_in_bounded_time()
    {
        const string question = "How do I book a slot at the community kitchen?";
        // Four distinct on-topic siblings, repeated with numbering: the guard keeps the distinct ones and drops repeats.
        string[] variants =
        [
            "Can I book the community kitchen for a private event?",
            "How far ahead can the community kitchen be reserved?",
            "What does it cost to rent the community kitchen?",
            "Who do I contact to cancel a community kitchen booking?",
        ];
        var lines = Enumerable.Range(0, 10_000).Select(i => $"{i % 100 + 1}. {variants[i % variants.Length]}");
        Upstream.Completion = _ => string.Join("\n", lines);

        var watch = Stopwatch.StartNew();
        using var budget = new CancellationTokenSource(AbsurdCompletionBudget);
        var reply = await Proxy.Client.PostLaneAsync("siblings", LaneCalls.Request(question), cancel: budget.Token);
        var took = watch.Elapsed;

        Assert.Equal(200, reply.Status);
        var kept = reply.Content.Split('\n');
        Assert.InRange(kept.Length, 1, Proxy.Options.Lanes["siblings"].MaxSiblings);
        Assert.All(kept, k => Assert.Contains(k, variants));
        Assert.Equal(kept.Length, kept.Distinct().Count());
        Assert.True(took < AbsurdCompletionBudget, $"took {took}");
        await AssertEntryIsAsync("siblings", question, reply.Content);
    }

    [Fact]
    public async Task A_one_megabyte_line_gives_a_correct_answer_and_no_poisoned_entry()
    {
        const string question = "Which beaches allow dogs in summer?";
        var huge = "Which beaches allow dogs in summer " + string.Join(' ', Enumerable.Repeat("and", 1 << 18)) + "?";
        Assert.True(huge.Length > 1 << 20);
        Upstream.Completion = _ => huge + "\nWhich beaches allow dogs during the summer season?";

        var watch = Stopwatch.StartNew();
        using var budget = new CancellationTokenSource(AbsurdCompletionBudget);
        var reply = await Proxy.Client.PostLaneAsync("siblings", LaneCalls.Request(question), cancel: budget.Token);
        var took = watch.Elapsed;

        Assert.Equal(200, reply.Status);
        Assert.True(took < AbsurdCompletionBudget, $"took {took}");
        // With the shipped model the huge line is kept and the near-copy of the question dropped, so something is
        // always stored: the answer holds only lines that were sent, and the entry holds exactly the answer.
        Assert.NotEmpty(reply.Content);
        var kept = reply.Content.Split('\n');
        Assert.All(kept, k => Assert.True(k == huge || k == "Which beaches allow dogs during the summer season?", "a line that was not sent"));
        await AssertEntryIsAsync("siblings", question, reply.Content);
    }

    /// <summary>The stored entry (if any) holds exactly what the client was given; a hit repeats it.</summary>
    async Task AssertEntryIsAsync(string lane, string question, string content)
    {
        var store = Proxy.Services.GetRequiredService<IRewriteStore>();
        await store.FlushAsync(CancellationToken.None);
        var entries = await store.ListAsync(new EntryQuery(lane, Limit: 10), CancellationToken.None);
        var entry = Assert.Single(entries, e => e.Question == question);
        Assert.Equal(content, entry.Content);
        var hit = await Proxy.AskAsync(lane, question);
        Assert.Equal("hit-exact", hit.Cache);
        Assert.Equal(content, hit.Content);
    }

    /// <summary>A body without a length, so the client sends it chunked and the proxy must count as it reads.</summary>
    sealed class NonSeekable(byte[] bytes) : MemoryStream(bytes)
    {
        public override bool CanSeek => false;
    }
}
