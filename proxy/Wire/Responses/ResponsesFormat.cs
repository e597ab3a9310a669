using System.Security.Cryptography;
using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire.Responses;

/// <summary>
/// The OpenAI Responses API (<c>POST /v1/responses</c>) as a lane format. The question comes from <c>input</c> (a string,
/// or the last user item's text); <c>instructions</c> join the scope as the system text. Calls that lean on state
/// kept by the provider (<c>previous_response_id</c>, <c>conversation</c>, <c>background</c>, a stored <c>prompt</c>) or
/// on tools are bypassed: a cached answer cannot stand in for them.
/// </summary>
public sealed class ResponsesFormat : IWireFormat
{
    public static readonly ResponsesFormat Instance = new();

    public string Name => "responses";

    public IReadOnlyList<string> ScopeHeaders { get; } = [];

    /// <summary>
    /// Fields that are not output-changing parameters: the messages and model (scoped on their own), streaming,
    /// bookkeeping that never changes the text, and the fields that bypass when set. Any other field, known or added
    /// later, separates entries.
    /// </summary>
    static readonly HashSet<string> NotParameters =
    [
        "input", "model", "instructions", "stream", "stream_options", "metadata", "store", "service_tier", "user",
        "safety_identifier", "prompt_cache_key", "prompt_cache_retention", "prompt_cache_options", "parallel_tool_calls",
        "include", "background", "previous_response_id", "conversation", "prompt",
    ];

    public LaneRequest Read(ReadOnlySpan<byte> utf8, string? pathModel)
    {
        var body = WireJson.ParseObject(utf8);
        var model = WireJson.String(body["model"]) ?? pathModel
            ?? throw new ChatRequestException("'model' is required and must be a string.", "model");
        var messages = new JsonArray();
        switch (body["instructions"])
        {
            case null:
            case JsonValue i when i.GetValueKind() == JsonValueKind.Null:
                break;
            case JsonValue i when i.GetValueKind() == JsonValueKind.String:
                messages.Add(new JsonObject { ["role"] = "system", ["content"] = i.GetValue<string>() });
                break;
            default:
                throw new ChatRequestException("'instructions' must be a string.", "instructions");
        }
        var bypass = ReadInput(body["input"], messages);
        bypass ??= Bypass(body);
        return new LaneRequest
        {
            Format = this,
            Body = body,
            Model = model,
            Messages = messages,
            Parameters = WireJson.Without(body, NotParameters),
            Stream = WireJson.Flag(body, "stream"),
            Bypass = bypass,
        };
    }

    static BypassReason? Bypass(JsonObject body)
    {
        if (WireJson.IsSet(body["tools"])) return BypassReason.Tools;
        if (WireJson.IsSet(body["previous_response_id"])) return BypassReason.PreviousResponse;
        if (WireJson.IsSet(body["conversation"])) return BypassReason.Conversation;
        if (WireJson.IsSet(body["background"])) return BypassReason.Background;
        if (WireJson.IsSet(body["prompt"])) return BypassReason.StoredPrompt;
        if (WireJson.IsSet(body["include"])) return BypassReason.Include;
        if (WireJson.Int(body["top_logprobs"]) > 0) return BypassReason.Logprobs;
        return null;
    }

    /// <summary>Adds the input's turns to the view; returns a bypass reason for input a cache cannot stand in for.</summary>
    static BypassReason? ReadInput(JsonNode? input, JsonArray messages)
    {
        switch (input)
        {
            case JsonValue v when v.GetValueKind() == JsonValueKind.String:
                messages.Add(new JsonObject { ["role"] = "user", ["content"] = v.GetValue<string>() });
                return null;
            case JsonArray items:
                foreach (var node in items)
                {
                    if (node is not JsonObject item) throw new ChatRequestException("Each 'input' item must be an object.", "input");
                    var type = WireJson.String(item["type"]) ?? "message";
                    if (type != "message") return type.Contains("call", StringComparison.Ordinal) ? BypassReason.Tools : BypassReason.UnsupportedInput;
                    var role = WireJson.String(item["role"])
                        ?? throw new ChatRequestException("Each 'input' message must have a string 'role'.", "input");
                    var (content, reason) = ReadContent(item["content"]);
                    if (reason is not null) return reason;
                    messages.Add(new JsonObject { ["role"] = role, ["content"] = content });
                }
                return null;
            default:
                throw new ChatRequestException("'input' is required and must be a string or an array of items.", "input");
        }
    }

    /// <summary>A message's content as a string or text parts; images, files and audio bypass.</summary>
    static (JsonNode? Content, BypassReason? Bypass) ReadContent(JsonNode? content)
    {
        switch (content)
        {
            case JsonValue v when v.GetValueKind() == JsonValueKind.String:
                return (v.GetValue<string>(), null);
            case JsonArray parts:
                var texts = new JsonArray();
                foreach (var node in parts)
                {
                    if (node is not JsonObject part) throw new ChatRequestException("Each content part must be an object.", "input");
                    switch (WireJson.String(part["type"]))
                    {
                        case "input_text" or "output_text" or "text":
                            texts.Add(new JsonObject { ["type"] = "text", ["text"] = WireJson.String(part["text"]) ?? "" });
                            break;
                        case "refusal":
                            texts.Add(new JsonObject { ["type"] = "text", ["text"] = WireJson.String(part["refusal"]) ?? "" });
                            break;
                        default:
                            return (null, BypassReason.Media);
                    }
                }
                return (texts, null);
            default:
                throw new ChatRequestException("A message's 'content' must be a string or an array of content parts.", "input");
        }
    }

    public byte[] UpstreamBody(LaneRequest request)
    {
        var copy = (JsonObject)request.Body.DeepClone();
        copy.Remove("stream");
        copy.Remove("stream_options");
        return JsonSerializer.SerializeToUtf8Bytes(copy);
    }

    public LaneAnswer ReadAnswer(ReadOnlySpan<byte> utf8)
    {
        var body = WireJson.ParseAnswer(utf8);
        if (body["output"] is not JsonArray output) throw new FormatException("the upstream answer has no 'output' array");
        string? text = null;
        foreach (var item in output)
        {
            if (WireJson.String(item?["type"]) != "message" || item!["content"] is not JsonArray parts) continue;
            foreach (var part in parts)
                if (WireJson.String(part?["type"]) == "output_text" && WireJson.String(part!["text"]) is { } t)
                    text = text is null ? t : text + t;
        }
        if (text is null) throw new FormatException("the upstream answer has no output_text");
        var usage = body["usage"] as JsonObject;
        return new LaneAnswer(body, text, WireJson.String(body["model"]), WireJson.Int(usage?["input_tokens"]),
            WireJson.Int(usage?["output_tokens"]));
    }

    public JsonObject WithContent(LaneAnswer answer, string content)
    {
        var copy = (JsonObject)answer.Body.DeepClone();
        var output = (JsonArray)copy["output"]!;
        var replaced = false;
        for (var i = 0; i < output.Count; i++)
        {
            if (WireJson.String(output[i]?["type"]) != "message") continue;
            if (replaced)
            {
                // The whole text now lives in the first message; later messages would repeat parts of it.
                output.RemoveAt(i--);
                continue;
            }
            output[i]!["content"] = new JsonArray(OutputText(content));
            replaced = true;
        }
        if (copy.ContainsKey("output_text")) copy["output_text"] = content;
        return copy;
    }

    static JsonObject OutputText(string text) => new()
    {
        ["type"] = "output_text",
        ["text"] = text,
        ["annotations"] = new JsonArray(),
        ["logprobs"] = new JsonArray(),
    };

    public JsonObject FromEntry(LaneRequest request, string model, string content, int inputTokens, int outputTokens)
    {
        var body = request.Body;
        return new JsonObject
        {
            ["id"] = "resp_rp" + Hex(16),
            ["object"] = "response",
            ["created_at"] = DateTimeOffset.UtcNow.ToUnixTimeSeconds(),
            ["status"] = "completed",
            ["background"] = false,
            ["error"] = null,
            ["incomplete_details"] = null,
            ["instructions"] = body["instructions"]?.DeepClone(),
            ["max_output_tokens"] = body["max_output_tokens"]?.DeepClone(),
            ["model"] = model,
            ["output"] = new JsonArray(new JsonObject
            {
                ["id"] = "msg_rp" + Hex(16),
                ["type"] = "message",
                ["status"] = "completed",
                ["role"] = "assistant",
                ["content"] = new JsonArray(OutputText(content)),
            }),
            ["parallel_tool_calls"] = body["parallel_tool_calls"]?.DeepClone() ?? true,
            ["previous_response_id"] = null,
            ["reasoning"] = body["reasoning"]?.DeepClone() ?? new JsonObject { ["effort"] = null, ["summary"] = null },
            ["store"] = false,
            ["temperature"] = body["temperature"]?.DeepClone(),
            ["text"] = body["text"]?.DeepClone() ?? new JsonObject { ["format"] = new JsonObject { ["type"] = "text" } },
            ["tool_choice"] = body["tool_choice"]?.DeepClone() ?? "auto",
            ["tools"] = new JsonArray(),
            ["top_p"] = body["top_p"]?.DeepClone(),
            ["truncation"] = body["truncation"]?.DeepClone() ?? "disabled",
            ["usage"] = new JsonObject
            {
                ["input_tokens"] = inputTokens,
                ["input_tokens_details"] = new JsonObject { ["cached_tokens"] = 0 },
                ["output_tokens"] = outputTokens,
                ["output_tokens_details"] = new JsonObject { ["reasoning_tokens"] = 0 },
                ["total_tokens"] = inputTokens + outputTokens,
            },
            ["user"] = body["user"]?.DeepClone(),
            ["metadata"] = body["metadata"]?.DeepClone() ?? new JsonObject(),
        };
    }

    static string Hex(int bytes) => Convert.ToHexStringLower(RandomNumberGenerator.GetBytes(bytes));

    public Task WriteAsync(HttpContext context, JsonObject answer, LaneRequest request) =>
        request.Stream ? ResponsesEvents.WriteAsync(context, answer) : JsonAnswer.WriteAsync(context, answer);

    public Task WriteErrorAsync(HttpContext context, int status, string message, string type, string code) =>
        ErrorResponse.WriteAsync(context, status, message, type, code);
}
