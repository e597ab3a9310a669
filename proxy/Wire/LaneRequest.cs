using System.Text.Json.Nodes;

namespace RewriteProxy.Wire;

/// <summary>
/// A lane call's request in any wire format, seen the same way by the lane flow: a chat-shaped view of its messages
/// (the system text or instructions first, then each turn's text), the fields that change the output (for the scope),
/// and whether the client wants a stream. The client's own body is kept too: a miss sends it upstream as it came.
/// </summary>
public sealed class LaneRequest
{
    public required IWireFormat Format { get; init; }

    /// <summary>The body as the client sent it.</summary>
    public required JsonObject Body { get; init; }

    public required string Model { get; init; }

    /// <summary>Chat-shaped view: objects with a string <c>role</c> and a <c>content</c> string or text-part array.</summary>
    public required JsonArray Messages { get; init; }

    /// <summary>Every field that can change the answer's text, other than the messages and the model.</summary>
    public required JsonObject Parameters { get; init; }

    public bool Stream { get; init; }

    /// <summary>Chat completions only: <c>stream_options.include_usage</c>.</summary>
    public bool IncludeUsage { get; init; }

    /// <summary>Why a cache cannot stand in for this call, or null.</summary>
    public BypassReason? Bypass { get; init; }
}

/// <summary>An upstream answer to a lane miss, read in the call's format.</summary>
/// <param name="Body">The answer as the upstream sent it; relayed with only the text replaced.</param>
/// <param name="Content">The text of the answer (a draft, or sibling lines).</param>
/// <param name="Model">The model the upstream says answered, if it says.</param>
/// <param name="InputTokens">Prompt tokens the upstream counted.</param>
/// <param name="OutputTokens">Completion tokens the upstream counted.</param>
public sealed record LaneAnswer(JsonObject Body, string Content, string? Model, int InputTokens, int OutputTokens);
