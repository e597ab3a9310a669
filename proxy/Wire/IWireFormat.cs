using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire;

/// <summary>
/// One wire format a lane speaks: how a call's request is read, what a miss sends upstream and how the answer is read,
/// and how an answer goes back to the client. OpenAI chat completions (<see cref="ChatCompletionsFormat"/>) is the one
/// there is; another format (the Responses API, Anthropic Messages) is another implementation and a route in
/// <c>Lanes/LaneEndpoints</c>, and the lane flow is the same for all of them.
/// </summary>
public interface IWireFormat
{
    /// <summary>Where the call goes below <c>Upstream:BaseUrl</c>, for misses and bypasses alike.</summary>
    string UpstreamPath { get; }

    /// <summary>Reads the client's request body.</summary>
    /// <exception cref="ChatRequestException">the body is not a request of this format (answered 400).</exception>
    ChatRequest ReadRequest(ReadOnlySpan<byte> body);

    /// <summary>What a miss sends upstream: the client's request, never streamed (the guard judges the whole answer).</summary>
    byte[] UpstreamBody(ChatRequest request);

    /// <summary>Reads the upstream's answer to a miss.</summary>
    /// <exception cref="FormatException">the answer cannot be used (answered 502, never cached).</exception>
    ChatCompletion ReadAnswer(ReadOnlySpan<byte> body);

    /// <summary>A hit's answer, built from its entry in the shape the upstream would have sent.</summary>
    JsonObject AnswerFromEntry(string model, string content, int promptTokens, int completionTokens);

    /// <summary>Writes an answer as one JSON body, or as the event stream the request asked for.</summary>
    Task WriteAnswerAsync(HttpContext context, JsonObject answer, ChatRequest request);
}
