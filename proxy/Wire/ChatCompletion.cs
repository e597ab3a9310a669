using System.Text.Json;
using System.Text.Json.Nodes;

namespace RewriteProxy.Wire;

/// <summary>An upstream chat completion (non-streamed), as a JSON tree so every field is relayed untouched.</summary>
public sealed class ChatCompletion
{
    public required JsonObject Body { get; init; }
    public required string Content { get; init; }
    public string? Model { get; init; }
    public int PromptTokens { get; init; }
    public int CompletionTokens { get; init; }
    public string FinishReason { get; init; } = "stop";

    /// <summary>Reads the first choice's message content; anything else is a <see cref="FormatException"/> (a 502, never cached).</summary>
    public static ChatCompletion Parse(ReadOnlySpan<byte> utf8)
    {
        var body = WireJson.ParseAnswer(utf8);
        if (body["choices"] is not JsonArray { Count: > 0 } choices || choices[0] is not JsonObject choice
            || choice["message"] is not JsonObject message)
            throw new FormatException("the upstream answer has no choices[0].message");
        var content = message["content"] is JsonValue v && v.GetValueKind() == JsonValueKind.String ? v.GetValue<string>() : null;
        if (content is null) throw new FormatException("the upstream answer has no text content in choices[0].message");
        var usage = body["usage"] as JsonObject;
        return new ChatCompletion
        {
            Body = body,
            Content = content,
            Model = body["model"] is JsonValue m && m.GetValueKind() == JsonValueKind.String ? m.GetValue<string>() : null,
            PromptTokens = Int(usage?["prompt_tokens"]),
            CompletionTokens = Int(usage?["completion_tokens"]),
            FinishReason = choice["finish_reason"] is JsonValue f && f.GetValueKind() == JsonValueKind.String ? f.GetValue<string>() : "stop",
        };
    }

    static int Int(JsonNode? n) => n is JsonValue v && v.GetValueKind() == JsonValueKind.Number && v.TryGetValue<int>(out var i) ? i : 0;
}
