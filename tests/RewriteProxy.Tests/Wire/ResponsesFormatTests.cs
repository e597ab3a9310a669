using System.Text;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;
using RewriteProxy.Wire.Responses;

namespace RewriteProxy.Tests.Wire;

/// <summary>
/// The Responses API as a lane format. Field names and event types follow the official `openai` npm client's type
/// definitions (openai 7.59.0, resources/responses/responses.d.ts); the end-to-end tests run that client itself.
/// </summary>
public sealed class ResponsesFormatTests
{
    static LaneRequest Read(string json, string? pathModel = null) => ResponsesFormat.Instance.Read(Encoding.UTF8.GetBytes(json), pathModel);

    [Fact]
    public void A_string_input_is_one_user_turn_after_the_instructions()
    {
        var request = Read("""{"model":"m1","instructions":"Write a passage.","input":"When does the ferry leave?","temperature":0.2,"metadata":{"a":"b"},"store":true}""");

        Assert.Null(request.Bypass);
        Assert.Equal("m1", request.Model);
        Assert.Equal("""[{"role":"system","content":"Write a passage."},{"role":"user","content":"When does the ferry leave?"}]""",
            request.Messages.ToJsonString());
        // temperature changes the text; metadata and store do not.
        Assert.Equal("""{"temperature":0.2}""", request.Parameters.ToJsonString());
    }

    [Fact]
    public void Input_items_become_turns_with_their_text_parts()
    {
        var request = Read("""
            {"model":"m1","stream":true,"input":[
              {"role":"developer","content":"Rewrite questions."},
              {"type":"message","role":"user","content":[{"type":"input_text","text":"part one"},{"type":"input_text","text":"part two"}]}]}
            """);

        Assert.True(request.Stream);
        Assert.Null(request.Bypass);
        Assert.Equal(2, request.Messages.Count);
        Assert.Equal("part one\npart two", RewriteProxy.Lanes.QuestionExtractor.TextOf((JsonObject)request.Messages[1]!));
    }

    [Theory]
    [InlineData("""{"model":"m","input":"q","tools":[{"type":"web_search"}]}""", "tools")]
    [InlineData("""{"model":"m","input":"q","previous_response_id":"resp_1"}""", "previous_response")]
    [InlineData("""{"model":"m","input":"q","conversation":"conv_1"}""", "conversation")]
    [InlineData("""{"model":"m","input":"q","background":true}""", "background")]
    [InlineData("""{"model":"m","input":"q","prompt":{"id":"pmpt_1"}}""", "stored_prompt")]
    [InlineData("""{"model":"m","input":"q","include":["message.output_text.logprobs"]}""", "include")]
    [InlineData("""{"model":"m","input":"q","top_logprobs":3}""", "logprobs")]
    [InlineData("""{"model":"m","input":[{"role":"user","content":[{"type":"input_image","image_url":"https://x.invalid/a.png"}]}]}""", "media")]
    [InlineData("""{"model":"m","input":[{"type":"function_call_output","call_id":"c1","output":"42"}]}""", "tools")]
    [InlineData("""{"model":"m","input":[{"type":"item_reference","id":"msg_1"}]}""", "unsupported_input")]
    public void Calls_a_cache_cannot_stand_in_for_are_bypassed_with_a_reason(string json, string reason) =>
        Assert.Equal(reason, LabelValue.Of(Read(json).Bypass!.Value));

    [Theory]
    [InlineData("""{"input":"q"}""")]
    [InlineData("""{"model":"m"}""")]
    [InlineData("""{"model":"m","input":42}""")]
    [InlineData("""{"model":"m","input":"q","instructions":[1]}""")]
    [InlineData("""{"model":"m","input":[{"content":"no role"}]}""")]
    public void A_body_without_the_needed_shape_is_a_400(string json) =>
        Assert.Throws<ChatRequestException>(() => Read(json));

    [Fact]
    public void The_model_may_come_from_the_path_when_the_body_names_none()
    {
        Assert.Equal("my-deployment", Read("""{"input":"q"}""", "my-deployment").Model);
    }

    const string Answer = """
        {"id":"resp_abc","object":"response","created_at":1760000000,"status":"completed","model":"m1",
         "output":[{"id":"rs_1","type":"reasoning","summary":[]},
                   {"id":"msg_1","type":"message","status":"completed","role":"assistant",
                    "content":[{"type":"output_text","text":"What time does the first ferry leave?\nIs there a night ferry?","annotations":[]}]}],
         "usage":{"input_tokens":31,"output_tokens":17,"total_tokens":48}}
        """;

    [Fact]
    public void An_answer_is_read_from_its_message_output_text_and_rewritten_with_every_other_field_kept()
    {
        var answer = ResponsesFormat.Instance.ReadAnswer(Encoding.UTF8.GetBytes(Answer));
        var rewritten = ResponsesFormat.Instance.WithContent(answer, "Is there a night ferry?");

        Assert.Equal("What time does the first ferry leave?\nIs there a night ferry?", answer.Content);
        Assert.Equal((31, 17, "m1"), (answer.InputTokens, answer.OutputTokens, answer.Model));
        Assert.Equal("resp_abc", rewritten["id"]!.GetValue<string>());
        Assert.Equal("reasoning", rewritten["output"]![0]!["type"]!.GetValue<string>());
        Assert.Equal("Is there a night ferry?", rewritten["output"]![1]!["content"]![0]!["text"]!.GetValue<string>());
        Assert.Equal(48, rewritten["usage"]!["total_tokens"]!.GetValue<int>());
    }

    [Theory]
    [InlineData("""{"id":"resp_1","output":[]}""")]
    [InlineData("""{"id":"resp_1"}""")]
    [InlineData("""[1,2]""")]
    [InlineData("""not json""")]
    public void An_answer_without_output_text_is_unusable(string json) =>
        Assert.Throws<FormatException>(() => ResponsesFormat.Instance.ReadAnswer(Encoding.UTF8.GetBytes(json)));

    [Fact]
    public void The_upstream_body_is_the_clients_own_without_streaming()
    {
        var request = Read("""{"model":"m1","input":"q","stream":true,"stream_options":{"include_obfuscation":false},"temperature":0}""");
        var upstream = JsonNode.Parse(ResponsesFormat.Instance.UpstreamBody(request))!.AsObject();

        Assert.Equal("""{"model":"m1","input":"q","temperature":0}""", upstream.ToJsonString());
    }

    [Fact]
    public async Task A_streamed_answer_is_the_event_sequence_with_rising_sequence_numbers_and_the_whole_text()
    {
        var request = Read("""{"model":"m1","input":"q","stream":true}""");
        const string text = "A passage about ferry times that is long enough to be cut into several pieces for the stream.";
        var answer = ResponsesFormat.Instance.FromEntry(request, "m1", text, 10, 20);
        var context = new DefaultHttpContext();
        context.Response.Body = new MemoryStream();

        await ResponsesFormat.Instance.WriteAsync(context, answer, request);

        Assert.Equal("text/event-stream", context.Response.ContentType);
        var events = ServerSentEvents.Read(((MemoryStream)context.Response.Body).ToArray());
        Assert.Equal(["response.created", "response.in_progress", "response.output_item.added", "response.content_part.added"],
            events.Take(4).Select(e => e.Event));
        Assert.Equal(["response.output_text.done", "response.content_part.done", "response.output_item.done", "response.completed"],
            events.TakeLast(4).Select(e => e.Event));
        Assert.All(events, e => Assert.Equal(e.Event, e.Data["type"]!.GetValue<string>()));
        Assert.Equal(Enumerable.Range(0, events.Count), events.Select(e => e.Data["sequence_number"]!.GetValue<int>()));
        var deltas = events.Where(e => e.Event == "response.output_text.delta").ToList();
        Assert.True(deltas.Count > 1);
        Assert.Equal(text, string.Concat(deltas.Select(e => e.Data["delta"]!.GetValue<string>())));
        Assert.Equal(text, events[^1].Data["response"]!["output"]![0]!["content"]![0]!["text"]!.GetValue<string>());
        Assert.Equal("in_progress", events[0].Data["response"]!["status"]!.GetValue<string>());
    }
}
