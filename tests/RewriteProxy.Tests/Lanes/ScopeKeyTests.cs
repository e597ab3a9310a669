using System.Text;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;
using RewriteProxy.Lanes;
using RewriteProxy.Tests.Fixtures;
using RewriteProxy.Wire;

namespace RewriteProxy.Tests.Lanes;

/// <summary>Which fields of a lane call change its scope (design.md "scope") and which do not.</summary>
public sealed class ScopeKeyTests
{
    static readonly LaneOptions Draft = new() { Name = "draft", Kind = LaneKind.Draft };
    const string Partition = "tenant-a";

    static JsonObject Base() => LaneCalls.Request("Where is the pool?", system: "Write a short passage that answers the question.");

    static string Scope(JsonObject body, LaneOptions? lane = null, string partition = Partition)
    {
        lane ??= Draft;
        var request = ChatCompletionsFormat.Instance.Read(Encoding.UTF8.GetBytes(body.ToJsonString()), null);
        var site = QuestionExtractor.Extract(request, lane).Site ?? throw new InvalidOperationException("no question");
        var endpoint = LaneEndpoint.Match("/v1/chat/completions", Microsoft.AspNetCore.Http.QueryString.Empty)!;
        return ScopeKey.Compute(lane, endpoint, request, site, partition, versionHeaders: "");
    }

    static JsonObject With(Action<JsonObject> change)
    {
        var body = Base();
        change(body);
        return body;
    }

    public static TheoryData<string, Action<JsonObject>> OutputChanging => new()
    {
        { "model", b => b["model"] = "another-model" },
        { "system message", b => b["messages"]![0]!["content"] = "Answer in French." },
        { "an earlier turn", b => b["messages"]!.AsArray().Insert(1, new JsonObject { ["role"] = "assistant", ["content"] = "Hello." }) },
        { "temperature", b => b["temperature"] = 0.7 },
        { "max_tokens", b => b["max_tokens"] = 50 },
        { "response_format", b => b["response_format"] = new JsonObject { ["type"] = "json_object" } },
        { "a field the proxy does not know", b => b["reasoning_effort"] = "high" },
    };

    public static TheoryData<string, Action<JsonObject>> OutputNeutral => new()
    {
        { "stream", b => b["stream"] = true },
        { "stream_options", b => { b["stream"] = true; b["stream_options"] = new JsonObject { ["include_usage"] = true }; } },
        { "user", b => b["user"] = "user-42" },
        { "metadata", b => b["metadata"] = new JsonObject { ["trace"] = "abc" } },
        { "store", b => b["store"] = false },
        { "service_tier", b => b["service_tier"] = "flex" },
        { "prompt_cache_key", b => b["prompt_cache_key"] = "k" },
        { "safety_identifier", b => b["safety_identifier"] = "s" },
        { "the question's own text", b => b["messages"]![1]!["content"] = "When does the pool open?" },
    };

    [Theory]
    [MemberData(nameof(OutputChanging))]
    public void An_output_changing_field_gives_another_scope(string what, Action<JsonObject> change)
    {
        Assert.NotEqual(Scope(Base()), Scope(With(change)));
        Assert.False(string.IsNullOrEmpty(what));
    }

    [Theory]
    [MemberData(nameof(OutputNeutral))]
    public void An_output_neutral_field_keeps_the_scope(string what, Action<JsonObject> change)
    {
        Assert.Equal(Scope(Base()), Scope(With(change)));
        Assert.False(string.IsNullOrEmpty(what));
    }

    [Fact]
    public void Partition_and_lane_are_part_of_the_scope()
    {
        Assert.NotEqual(Scope(Base()), Scope(Base(), partition: "tenant-b"));
        Assert.NotEqual(Scope(Base()), Scope(Base(), Draft with { Name = "other" }));
    }

    [Fact]
    public void Lane_name_case_and_key_order_do_not_change_the_scope()
    {
        var reordered = new JsonObject { ["temperature"] = 0, ["messages"] = Base()["messages"]!.DeepClone(), ["model"] = "scripted-model" };
        Assert.Equal(Scope(Base()), Scope(Base(), Draft with { Name = "DRAFT" }));
        Assert.Equal(Scope(Base()), Scope(reordered));
    }

    [Fact]
    public void The_template_around_a_question_pattern_is_part_of_the_scope()
    {
        var lane = Draft with { QuestionPattern = new Regex("Question: (?<q>.+)", RegexOptions.Singleline) };
        JsonObject Templated(string template, string question) => With(b => b["messages"]![1]!["content"] = template + question);

        var first = Scope(Templated("Context: pools.\nQuestion: ", "Where is the pool?"), lane);
        var sameTemplate = Scope(Templated("Context: pools.\nQuestion: ", "When does the pool open?"), lane);
        var otherTemplate = Scope(Templated("Context: parks.\nQuestion: ", "Where is the pool?"), lane);

        Assert.Equal(first, sameTemplate);
        Assert.NotEqual(first, otherTemplate);
    }

    [Fact]
    public void The_scope_is_a_sha256_hash_holding_no_text()
    {
        var scope = Scope(Base());
        Assert.Matches("^[0-9a-f]{64}$", scope);
        Assert.DoesNotContain("pool", scope);
    }
}
