using System.Text;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;
using RewriteProxy.Lanes;
using RewriteProxy.Wire;

namespace RewriteProxy.Tests.Lanes;

/// <summary>Where the question is found, and which calls a cache cannot stand in for (README "Question").</summary>
public sealed class QuestionExtractorTests
{
    static readonly LaneOptions Lane = new() { Name = "siblings", Kind = LaneKind.Siblings };

    static Extraction Extract(string json, LaneOptions? lane = null) =>
        QuestionExtractor.Extract(ChatCompletionsFormat.Instance.Read(Encoding.UTF8.GetBytes(json), null), lane ?? Lane);

    static string Call(string messages, string extra = "") => $$"""{"model":"m","messages":{{messages}}{{extra}}}""";

    [Fact]
    public void The_question_is_the_last_user_message_trimmed()
    {
        var messages = """[{"role":"system","content":"List."},{"role":"user","content":"Old?"},{"role":"assistant","content":"Yes."},{"role":"user","content":"  Where is the pool?  "}]""";
        var site = Extract(Call(messages)).Site!;

        Assert.Equal("Where is the pool?", site.Question);
        Assert.Equal(3, site.MessageIndex);
    }

    [Fact]
    public void Text_parts_of_an_array_content_are_joined_by_newlines()
    {
        var site = Extract(Call("""[{"role":"user","content":[{"type":"text","text":"Where is"},{"type":"text","text":"the pool?"}]}]""")).Site!;

        Assert.Equal("Where is\nthe pool?", site.Question);
    }

    [Fact]
    public void A_question_pattern_picks_the_group_q_and_keeps_its_span()
    {
        var lane = Lane with { QuestionPattern = new Regex("Question: (?<q>[^\n]+)") };
        var site = Extract(Call("""[{"role":"user","content":"Context: pools.\nQuestion: Where is the pool?\nAnswer briefly."}]"""), lane).Site!;

        Assert.Equal("Where is the pool?", site.Question);
        Assert.Equal("Where is the pool?", site.MessageText.Substring(site.Start, site.Length));
    }

    [Theory]
    [InlineData("""[{"role":"user","content":"Where is the pool?"}]""", ""","tools":[{"type":"function","function":{"name":"f"}}]""", BypassReason.Tools)]
    [InlineData("""[{"role":"user","content":"Where is the pool?"}]""", ""","functions":[{"name":"f"}]""", BypassReason.Tools)]
    [InlineData("""[{"role":"user","content":"Where is the pool?"}]""", ",\"tool_choice\":\"auto\"", BypassReason.Tools)]
    [InlineData("""[{"role":"user","content":"Where is the pool?"}]""", ""","audio":{"voice":"alloy"}""", BypassReason.Audio)]
    [InlineData("""[{"role":"user","content":"Where is the pool?"}]""", ""","prediction":{"type":"content","content":"x"}""", BypassReason.Prediction)]
    [InlineData("""[{"role":"user","content":"Where is the pool?"}]""", ""","n":2""", BypassReason.N)]
    [InlineData("""[{"role":"user","content":"Where is the pool?"}]""", ""","logprobs":true""", BypassReason.Logprobs)]
    [InlineData("""[{"role":"user","content":"Where is the pool?"}]""", ""","modalities":["text","audio"]""", BypassReason.Modalities)]
    [InlineData("""[{"role":"user","content":[{"type":"image_url","image_url":{"url":"http://x/y.png"}},{"type":"text","text":"What is this?"}]}]""", "", BypassReason.Media)]
    [InlineData("""[{"role":"user","content":"Tide?"},{"role":"tool","tool_call_id":"c","content":"2 m"},{"role":"user","content":"And at six?"}]""", "", BypassReason.Tools)]
    [InlineData("""[{"role":"system","content":"Be brief."}]""", "", BypassReason.NoQuestion)]
    [InlineData("""[{"role":"user","content":"   "}]""", "", BypassReason.NoQuestion)]
    [InlineData("""[{"role":"user","content":null}]""", "", BypassReason.NoQuestion)]
    public void Calls_a_cache_cannot_stand_in_for_are_bypassed_with_their_reason(string messages, string extra, BypassReason reason)
    {
        var extraction = Extract(Call(messages, extra));

        Assert.Null(extraction.Site);
        Assert.Equal(reason, extraction.BypassReason);
    }

    [Theory]
    [InlineData(""","n":1""")]
    [InlineData(""","logprobs":false""")]
    [InlineData(""","tools":null""")]
    [InlineData(""","modalities":["text"]""")]
    public void Settings_that_change_nothing_are_not_a_bypass(string extra)
    {
        Assert.NotNull(Extract(Call("""[{"role":"user","content":"Where is the pool?"}]""", extra)).Site);
    }

    [Fact]
    public void A_question_pattern_that_does_not_match_is_no_question()
    {
        var lane = Lane with { QuestionPattern = new Regex("Question: (?<q>.+)") };

        Assert.Equal(BypassReason.NoQuestion, Extract(Call("""[{"role":"user","content":"Where is the pool?"}]"""), lane).BypassReason);
    }

    [Fact]
    public void Text_of_a_message_without_text_is_null()
    {
        Assert.Null(QuestionExtractor.TextOf(new JsonObject { ["role"] = "user", ["content"] = new JsonArray() }));
        Assert.Equal("hi", QuestionExtractor.TextOf(new JsonObject { ["role"] = "user", ["content"] = "hi" }));
    }
}
