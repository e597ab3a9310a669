using System.Text;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;
using RewriteProxy.Wire.Messages;

namespace RewriteProxy.Tests.Wire;

/// <summary>
/// The Anthropic Messages API as a lane format. Field names and event types follow the official
/// `@anthropic-ai/sdk` npm client's type definitions (1.15.0, resources/messages/messages.d.ts, lib/MessageStream.js);
/// the end-to-end tests run that client itself.
/// </summary>
public sealed class MessagesFormatTests
{
    static LaneRequest Read(string json) => MessagesFormat.Instance.Read(Encoding.UTF8.GetBytes(json), null);

    [Fact]
    public void The_system_text_and_turns_make_the_view_and_max_tokens_is_a_parameter()
    {
        var request = Read("""
            {"model":"c1","max_tokens":300,"temperature":0.1,"metadata":{"user_id":"u1"},
             "system":[{"type":"text","text":"Rewrite the question.","cache_control":{"type":"ephemeral"}}],
             "messages":[{"role":"user","content":"Where is the lost property office?"}]}
            """);

        Assert.Null(request.Bypass);
        Assert.Equal("c1", request.Model);
        Assert.Equal("""[{"role":"system","content":[{"type":"text","text":"Rewrite the question."}]},{"role":"user","content":"Where is the lost property office?"}]""",
            request.Messages.ToJsonString());
        Assert.Equal("""{"max_tokens":300,"temperature":0.1}""", request.Parameters.ToJsonString());
    }

    [Theory]
    [InlineData("""{"model":"c","max_tokens":9,"messages":[{"role":"user","content":"q"}],"tools":[{"name":"t","input_schema":{}}]}""", "tools")]
    [InlineData("""{"model":"c","max_tokens":9,"messages":[{"role":"user","content":[{"type":"tool_result","tool_use_id":"t1","content":"42"}]}]}""", "tools")]
    [InlineData("""{"model":"c","max_tokens":9,"messages":[{"role":"user","content":[{"type":"image","source":{"type":"url","url":"https://x.invalid/a.png"}}]}]}""", "media")]
    [InlineData("""{"model":"c","max_tokens":9,"messages":[{"role":"user","content":[{"type":"document","source":{"type":"text","data":"d"}}]}]}""", "media")]
    [InlineData("""{"model":"c","max_tokens":9,"messages":[{"role":"user","content":"q"}],"thinking":{"type":"enabled","budget_tokens":1024}}""", "thinking")]
    public void Calls_a_cache_cannot_stand_in_for_are_bypassed_with_a_reason(string json, string reason) =>
        Assert.Equal(reason, LabelValue.Of(Read(json).Bypass!.Value));

    [Fact]
    public void Thinking_turned_off_is_not_a_bypass() =>
        Assert.Null(Read("""{"model":"c","max_tokens":9,"messages":[{"role":"user","content":"q"}],"thinking":{"type":"disabled"}}""").Bypass);

    [Theory]
    [InlineData("""{"max_tokens":9,"messages":[{"role":"user","content":"q"}]}""")]
    [InlineData("""{"model":"c","max_tokens":9}""")]
    [InlineData("""{"model":"c","max_tokens":9,"messages":[]}""")]
    [InlineData("""{"model":"c","max_tokens":9,"messages":[{"content":"q"}]}""")]
    [InlineData("""{"model":"c","max_tokens":9,"messages":[{"role":"user","content":5}]}""")]
    [InlineData("""{"model":"c","max_tokens":9,"system":7,"messages":[{"role":"user","content":"q"}]}""")]
    public void A_body_without_the_needed_shape_is_a_400(string json) =>
        Assert.Throws<ChatRequestException>(() => Read(json));

    const string Answer = """
        {"id":"msg_01","type":"message","role":"assistant","model":"c1",
         "content":[{"type":"text","text":"Where can I collect lost items?\n"},{"type":"text","text":"Who runs the lost property desk?"}],
         "stop_reason":"end_turn","stop_sequence":null,"usage":{"input_tokens":22,"output_tokens":14}}
        """;

    [Fact]
    public void An_answer_is_read_from_its_text_blocks_and_rewritten_as_one_block()
    {
        var answer = MessagesFormat.Instance.ReadAnswer(Encoding.UTF8.GetBytes(Answer));
        var rewritten = MessagesFormat.Instance.WithContent(answer, "Who runs the lost property desk?");

        Assert.Equal("Where can I collect lost items?\nWho runs the lost property desk?", answer.Content);
        Assert.Equal((22, 14, "c1"), (answer.InputTokens, answer.OutputTokens, answer.Model));
        Assert.Equal("msg_01", rewritten["id"]!.GetValue<string>());
        Assert.Equal("""[{"type":"text","text":"Who runs the lost property desk?"}]""", rewritten["content"]!.ToJsonString());
    }

    [Theory]
    [InlineData("""{"id":"msg_1","content":[]}""")]
    [InlineData("""{"id":"msg_1","content":[{"type":"tool_use","id":"t","name":"n","input":{}}]}""")]
    [InlineData("""{"type":"error","error":{"type":"overloaded_error"}}""")]
    public void An_answer_without_text_is_unusable(string json) =>
        Assert.Throws<FormatException>(() => MessagesFormat.Instance.ReadAnswer(Encoding.UTF8.GetBytes(json)));

    [Fact]
    public async Task A_streamed_answer_has_an_event_line_per_event_and_the_whole_text()
    {
        var request = Read("""{"model":"c1","max_tokens":300,"stream":true,"messages":[{"role":"user","content":"q"}]}""");
        const string text = "A passage long enough to be written as several text deltas, the way the API streams it to clients.";
        var answer = MessagesFormat.Instance.FromEntry(request, "c1", text, 11, 23);
        var context = new DefaultHttpContext();
        context.Response.Body = new MemoryStream();

        await MessagesFormat.Instance.WriteAsync(context, answer, request);

        var events = ServerSentEvents.Read(((MemoryStream)context.Response.Body).ToArray());
        Assert.Equal(["message_start", "content_block_start"], events.Take(2).Select(e => e.Event));
        Assert.Equal(["content_block_stop", "message_delta", "message_stop"], events.TakeLast(3).Select(e => e.Event));
        Assert.All(events, e => Assert.Equal(e.Event, e.Data["type"]!.GetValue<string>()));
        Assert.Equal(text, string.Concat(events.Where(e => e.Event == "content_block_delta").Select(e => e.Data["delta"]!["text"]!.GetValue<string>())));
        Assert.Equal(23, events[^2].Data["usage"]!["output_tokens"]!.GetValue<int>());
        Assert.Equal(11, events[0].Data["message"]!["usage"]!["input_tokens"]!.GetValue<int>());
    }

    [Fact]
    public async Task Errors_are_written_in_anthropics_shape()
    {
        var context = new DefaultHttpContext();
        context.Response.Body = new MemoryStream();

        await MessagesFormat.Instance.WriteErrorAsync(context, 400, "bad body", "invalid_request_error", "invalid_request");

        var body = JsonNode.Parse(((MemoryStream)context.Response.Body).ToArray())!;
        Assert.Equal(400, context.Response.StatusCode);
        Assert.Equal("error", body["type"]!.GetValue<string>());
        Assert.Equal("invalid_request_error", body["error"]!["type"]!.GetValue<string>());
        Assert.Equal("bad body", body["error"]!["message"]!.GetValue<string>());
    }
}
