using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire;

/// <summary>
/// One API shape a lane can be called in (OpenAI chat completions, OpenAI Responses, Anthropic Messages): how its
/// requests are read, what goes upstream on a miss, how its answers are read, and how an answer (a miss's or a cache
/// entry's) is written back, as JSON or as that API's event stream.
/// </summary>
public interface IWireFormat
{
    /// <summary>Short name, part of the scope: entries of one format are never served in another.</summary>
    string Name { get; }

    /// <summary>Request headers that change the answer (an API version, beta features): part of the scope.</summary>
    IReadOnlyList<string> ScopeHeaders { get; }

    /// <summary>Reads a request body; a body the proxy cannot read is a <see cref="ChatRequestException"/> (400).</summary>
    /// <param name="utf8">The request body.</param>
    /// <param name="pathModel">The model named by the path (an Azure OpenAI deployment), used when the body names none.</param>
    LaneRequest Read(ReadOnlySpan<byte> utf8, string? pathModel);

    /// <summary>The body sent upstream on a miss: the client's own, never streamed (the whole answer is guarded first).</summary>
    byte[] UpstreamBody(LaneRequest request);

    /// <summary>Reads an upstream answer; one without usable text is a <see cref="FormatException"/> (502, never cached).</summary>
    LaneAnswer ReadAnswer(ReadOnlySpan<byte> utf8);

    /// <summary>The upstream's answer with its text replaced (kept siblings, a fallback); every other field untouched.</summary>
    JsonObject WithContent(LaneAnswer answer, string content);

    /// <summary>An answer built from a cache entry, in the shape the upstream would have sent.</summary>
    JsonObject FromEntry(LaneRequest request, string model, string content, int inputTokens, int outputTokens);

    /// <summary>Writes an answer as one JSON body, or as this format's event stream when the request asked for one.</summary>
    Task WriteAsync(HttpContext context, JsonObject answer, LaneRequest request);

    /// <summary>Writes an error in the shape this format's clients read.</summary>
    Task WriteErrorAsync(HttpContext context, int status, string message, string type, string code);
}
