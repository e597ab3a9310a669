using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire;

/// <summary>
/// OpenAI chat completions (<c>POST /v1/chat/completions</c>, also Azure OpenAI's deployment path) as a lane format:
/// the messages are the view as they are.
/// </summary>
public sealed class ChatCompletionsFormat : IWireFormat
{
    public static readonly ChatCompletionsFormat Instance = new();

    public string Name => "chat";

    public IReadOnlyList<string> ScopeHeaders { get; } = [];

    /// <summary>
    /// Fields known not to change the completion's text. Every other field (temperature, top_p, max_tokens, seed, stop,
    /// response_format, penalties, logit_bias, reasoning settings, and any field added later) is part of the scope:
    /// an unknown field separates entries rather than risk serving an answer made under other settings.
    /// </summary>
    static readonly HashSet<string> NotParameters =
        ["messages", "model", "stream", "stream_options", "user", "metadata", "store", "service_tier", "prompt_cache_key", "safety_identifier"];

    /// <summary>Request fields that make an answer depend on more than the messages' text.</summary>
    static readonly (string Field, BypassReason Reason)[] UncacheableFields =
    [
        ("tools", BypassReason.Tools), ("functions", BypassReason.Tools), ("tool_choice", BypassReason.Tools),
        ("function_call", BypassReason.Tools), ("audio", BypassReason.Audio), ("prediction", BypassReason.Prediction),
    ];

    public LaneRequest Read(ReadOnlySpan<byte> utf8, string? pathModel)
    {
        var chat = ChatRequest.Parse(utf8, pathModel);
        return new LaneRequest
        {
            Format = this,
            Body = chat.Body,
            Model = chat.Model,
            Messages = chat.Messages,
            Parameters = WireJson.Without(chat.Body, NotParameters),
            Stream = chat.Stream,
            IncludeUsage = chat.IncludeUsage,
            Bypass = Bypass(chat),
        };
    }

    static BypassReason? Bypass(ChatRequest chat)
    {
        var body = chat.Body;
        foreach (var (field, reason) in UncacheableFields)
            if (body[field] is { } value && value.GetValueKind() != JsonValueKind.Null) return reason;
        if (body["n"] is JsonValue n && n.GetValueKind() == JsonValueKind.Number && (!n.TryGetValue<int>(out var count) || count != 1))
            return BypassReason.N;
        if (body["logprobs"] is JsonValue lp && lp.GetValueKind() == JsonValueKind.True) return BypassReason.Logprobs;
        if (body["modalities"] is JsonArray modalities && modalities.Any(m => m?.ToString() != "text")) return BypassReason.Modalities;
        // Tool turns and media parts in the conversation are found by QuestionExtractor, on every format's view.
        return null;
    }

    public byte[] UpstreamBody(LaneRequest request) => WireJson.WithoutStreaming(request.Body);

    public LaneAnswer ReadAnswer(ReadOnlySpan<byte> utf8)
    {
        var completion = ChatCompletion.Parse(utf8);
        return new LaneAnswer(completion.Body, completion.Content, completion.Model, completion.PromptTokens, completion.CompletionTokens);
    }

    public JsonObject WithContent(LaneAnswer answer, string content)
    {
        var copy = (JsonObject)answer.Body.DeepClone();
        copy["choices"]![0]!["message"]!["content"] = content;
        return copy;
    }

    public JsonObject FromEntry(LaneRequest request, string model, string content, int inputTokens, int outputTokens) =>
        CompletionWriter.FromEntry(model, content, inputTokens, outputTokens);

    public Task WriteAsync(HttpContext context, JsonObject answer, LaneRequest request) =>
        CompletionWriter.WriteAsync(context, answer, request.Stream, request.IncludeUsage);

    public Task WriteErrorAsync(HttpContext context, int status, string message, string type, string code) =>
        ErrorResponse.WriteAsync(context, status, message, type, code);
}
