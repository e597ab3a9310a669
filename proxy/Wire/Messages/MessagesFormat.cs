using System.Security.Cryptography;
using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire.Messages;

/// <summary>
/// The Anthropic Messages API (<c>POST /v1/messages</c>) as a lane format. The question comes from the last user
/// message; <c>system</c> joins the scope as the system text, and <c>max_tokens</c>, <c>temperature</c>,
/// <c>stop_sequences</c> and every other field not known to be neutral as parameters. Tools and extended thinking
/// bypass. Errors are written in Anthropic's own shape, which its clients read.
/// </summary>
public sealed class MessagesFormat : IWireFormat
{
    public static readonly MessagesFormat Instance = new();

    public string Name => "messages";

    public IReadOnlyList<string> ScopeHeaders { get; } = ["anthropic-version", "anthropic-beta"];

    /// <summary>Fields that are not output-changing parameters (see <see cref="Responses.ResponsesFormat"/> for the rule).</summary>
    static readonly HashSet<string> NotParameters =
        ["messages", "model", "system", "stream", "metadata", "service_tier", "cache_control", "tools", "mcp_servers", "container"];

    public LaneRequest Read(ReadOnlySpan<byte> utf8, string? pathModel)
    {
        var body = WireJson.ParseObject(utf8);
        var model = WireJson.String(body["model"]) ?? pathModel
            ?? throw new ChatRequestException("'model' is required and must be a string.", "model");
        if (body["messages"] is not JsonArray turns) throw new ChatRequestException("'messages' is required and must be an array.", "messages");
        if (turns.Count == 0) throw new ChatRequestException("'messages' must not be empty.", "messages");

        var messages = new JsonArray();
        BypassReason? bypass = null;
        var (system, systemBypass) = ReadContent(body["system"], "system", allowAbsent: true);
        bypass ??= systemBypass;
        if (system is not null) messages.Add(new JsonObject { ["role"] = "system", ["content"] = system });
        foreach (var node in turns)
        {
            if (node is not JsonObject turn || WireJson.String(turn["role"]) is not { } role)
                throw new ChatRequestException("Each message must be an object with a string 'role'.", "messages");
            var (content, reason) = ReadContent(turn["content"], "messages", allowAbsent: false);
            bypass ??= reason;
            messages.Add(new JsonObject { ["role"] = role, ["content"] = content });
        }
        if (WireJson.IsSet(body["tools"]) || WireJson.IsSet(body["mcp_servers"]) || WireJson.IsSet(body["container"]))
            bypass ??= BypassReason.Tools;
        if (body["thinking"] is JsonObject thinking && WireJson.String(thinking["type"]) is { } mode && mode != "disabled")
            bypass ??= BypassReason.Thinking;

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

    /// <summary>A string, or content blocks of which only text is cacheable; returns the view's content and a bypass reason.</summary>
    static (JsonNode? Content, BypassReason? Bypass) ReadContent(JsonNode? content, string field, bool allowAbsent)
    {
        switch (content)
        {
            case null when allowAbsent:
                return (null, null);
            case JsonValue v when v.GetValueKind() == JsonValueKind.String:
                return (v.GetValue<string>(), null);
            case JsonArray blocks:
                var texts = new JsonArray();
                BypassReason? bypass = null;
                foreach (var node in blocks)
                {
                    if (node is not JsonObject block) throw new ChatRequestException("Each content block must be an object.", field);
                    switch (WireJson.String(block["type"]))
                    {
                        case "text":
                            texts.Add(new JsonObject { ["type"] = "text", ["text"] = WireJson.String(block["text"]) ?? "" });
                            break;
                        case "thinking" or "redacted_thinking":
                            bypass ??= BypassReason.Thinking;
                            break;
                        case { } type when type.Contains("tool", StringComparison.Ordinal):
                            bypass ??= BypassReason.Tools;
                            break;
                        default:
                            bypass ??= BypassReason.Media;
                            break;
                    }
                }
                return (texts, bypass);
            default:
                throw new ChatRequestException($"'{field}' content must be a string or an array of content blocks.", field);
        }
    }

    public byte[] UpstreamBody(LaneRequest request)
    {
        var copy = (JsonObject)request.Body.DeepClone();
        copy.Remove("stream");
        return JsonSerializer.SerializeToUtf8Bytes(copy);
    }

    public LaneAnswer ReadAnswer(ReadOnlySpan<byte> utf8)
    {
        var body = WireJson.ParseAnswer(utf8);
        if (body["content"] is not JsonArray blocks) throw new FormatException("the upstream answer has no 'content' array");
        string? text = null;
        foreach (var block in blocks)
            if (WireJson.String(block?["type"]) == "text" && WireJson.String(block!["text"]) is { } t)
                text = text is null ? t : text + t;
        if (text is null) throw new FormatException("the upstream answer has no text block");
        var usage = body["usage"] as JsonObject;
        return new LaneAnswer(body, text, WireJson.String(body["model"]), WireJson.Int(usage?["input_tokens"]),
            WireJson.Int(usage?["output_tokens"]));
    }

    public JsonObject WithContent(LaneAnswer answer, string content)
    {
        var copy = (JsonObject)answer.Body.DeepClone();
        copy["content"] = new JsonArray(TextBlock(content));
        return copy;
    }

    static JsonObject TextBlock(string text) => new() { ["type"] = "text", ["text"] = text };

    public JsonObject FromEntry(LaneRequest request, string model, string content, int inputTokens, int outputTokens) => new()
    {
        ["id"] = "msg_rp" + Convert.ToHexStringLower(RandomNumberGenerator.GetBytes(12)),
        ["type"] = "message",
        ["role"] = "assistant",
        ["model"] = model,
        ["content"] = new JsonArray(TextBlock(content)),
        ["stop_reason"] = "end_turn",
        ["stop_sequence"] = null,
        ["usage"] = new JsonObject
        {
            ["input_tokens"] = inputTokens,
            ["cache_creation_input_tokens"] = 0,
            ["cache_read_input_tokens"] = 0,
            ["output_tokens"] = outputTokens,
        },
    };

    public Task WriteAsync(HttpContext context, JsonObject answer, LaneRequest request) =>
        request.Stream ? MessagesEvents.WriteAsync(context, answer) : JsonAnswer.WriteAsync(context, answer);

    /// <summary>Anthropic's error shape: <c>{"type":"error","error":{"type","message"}}</c>.</summary>
    public async Task WriteErrorAsync(HttpContext context, int status, string message, string type, string code)
    {
        if (context.Response.HasStarted)
        {
            context.Abort();
            return;
        }
        var body = JsonSerializer.SerializeToUtf8Bytes(new JsonObject
        {
            ["type"] = "error",
            ["error"] = new JsonObject { ["type"] = AnthropicType(status, type), ["message"] = message, ["code"] = code },
        });
        context.Response.StatusCode = status;
        context.Response.ContentType = "application/json";
        context.Response.ContentLength = body.Length;
        await context.Response.Body.WriteAsync(body, context.RequestAborted);
    }

    /// <summary>Anthropic's error type names for the statuses the proxy itself answers with.</summary>
    static string AnthropicType(int status, string type) => status switch
    {
        400 or 422 => "invalid_request_error",
        401 => "authentication_error",
        404 => "not_found_error",
        413 => "request_too_large",
        504 => "timeout_error",
        _ => type == "invalid_request_error" ? type : "api_error",
    };
}
