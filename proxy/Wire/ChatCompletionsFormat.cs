using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire;

/// <summary>OpenAI chat completions, JSON and server-sent events: <c>POST .../chat/completions</c>.</summary>
public sealed class ChatCompletionsFormat : IWireFormat
{
    public static ChatCompletionsFormat Instance { get; } = new();

    ChatCompletionsFormat() { }

    public string UpstreamPath => "/chat/completions";

    public ChatRequest ReadRequest(ReadOnlySpan<byte> body) => ChatRequest.Parse(body);

    public byte[] UpstreamBody(ChatRequest request) => request.UpstreamBody();

    public ChatCompletion ReadAnswer(ReadOnlySpan<byte> body) => ChatCompletion.Parse(body);

    public JsonObject AnswerFromEntry(string model, string content, int promptTokens, int completionTokens) =>
        CompletionWriter.FromEntry(model, content, promptTokens, completionTokens);

    public Task WriteAnswerAsync(HttpContext context, JsonObject answer, ChatRequest request) =>
        CompletionWriter.WriteAsync(context, answer, request.Stream, request.IncludeUsage);
}
