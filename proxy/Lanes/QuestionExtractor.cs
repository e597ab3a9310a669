using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>Where the question sits in the request: the message index and the character span within its text.</summary>
public sealed record QuestionSite(string Question, int MessageIndex, string MessageText, int Start, int Length);

/// <summary>The question of a lane call, or why the call cannot be cached (then it is a bypass).</summary>
public sealed record Extraction(QuestionSite? Site, BypassReason? BypassReason)
{
    public static Extraction Bypass(BypassReason reason) => new(null, reason);
}

/// <summary>
/// Finds the question: the text of the last user message (a string, or the text parts of an array), narrowed by the
/// lane's QuestionPattern group <c>q</c> when one is set. Requests whose answer a cache cannot stand in for are bypassed.
/// </summary>
public static class QuestionExtractor
{
    /// <summary>Request fields that make an answer depend on more than the messages' text.</summary>
    static readonly (string Field, BypassReason Reason)[] UncacheableFields =
    [
        ("tools", BypassReason.Tools), ("functions", BypassReason.Tools), ("tool_choice", BypassReason.Tools),
        ("function_call", BypassReason.Tools), ("audio", BypassReason.Audio), ("prediction", BypassReason.Prediction),
    ];

    public static Extraction Extract(ChatRequest request, LaneOptions lane)
    {
        var body = request.Body;
        foreach (var (field, reason) in UncacheableFields)
            if (body[field] is { } value && value.GetValueKind() != JsonValueKind.Null)
                return Extraction.Bypass(reason);
        if (body["n"] is JsonValue n && n.GetValueKind() == JsonValueKind.Number && (!n.TryGetValue<int>(out var count) || count != 1))
            return Extraction.Bypass(BypassReason.N);
        if (body["logprobs"] is JsonValue lp && lp.GetValueKind() == JsonValueKind.True) return Extraction.Bypass(BypassReason.Logprobs);
        if (body["modalities"] is JsonArray modalities && modalities.Any(m => m?.ToString() != "text")) return Extraction.Bypass(BypassReason.Modalities);

        var messages = request.Messages;
        var last = -1;
        for (var i = messages.Count - 1; i >= 0; i--)
        {
            var message = (JsonObject)messages[i]!;
            if (message["tool_calls"] is not null || message["role"]!.GetValue<string>() is "tool" or "function")
                return Extraction.Bypass(BypassReason.Tools);
            foreach (var part in (message["content"] as JsonArray) ?? [])
                if (part is JsonObject p && p["type"]?.ToString() is { } type && type != "text")
                    return Extraction.Bypass(BypassReason.Media);
            if (last < 0 && message["role"]!.GetValue<string>() == "user") last = i;
        }
        if (last < 0) return Extraction.Bypass(BypassReason.NoQuestion);

        var text = TextOf((JsonObject)messages[last]!);
        if (text is null) return Extraction.Bypass(BypassReason.NoQuestion);

        int start = 0, length = text.Length;
        if (lane.QuestionPattern is { } pattern)
        {
            Match match;
            try
            {
                match = pattern.Match(text);
            }
            catch (RegexMatchTimeoutException)
            {
                return Extraction.Bypass(BypassReason.NoQuestion);
            }
            if (!match.Success || !match.Groups["q"].Success) return Extraction.Bypass(BypassReason.NoQuestion);
            (start, length) = (match.Groups["q"].Index, match.Groups["q"].Length);
        }
        var question = text.Substring(start, length).Trim();
        if (question.Length == 0) return Extraction.Bypass(BypassReason.NoQuestion);
        return new Extraction(new QuestionSite(question, last, text, start, length), null);
    }

    /// <summary>A message's text: a string content, or its text parts joined by newlines; null when it has none.</summary>
    public static string? TextOf(JsonObject message)
    {
        switch (message["content"])
        {
            case JsonValue v when v.GetValueKind() == JsonValueKind.String:
                return v.GetValue<string>();
            case JsonArray parts:
                var sb = new StringBuilder();
                foreach (var part in parts)
                {
                    if (part?["text"] is not JsonValue t || t.GetValueKind() != JsonValueKind.String) continue;
                    if (sb.Length > 0) sb.Append('\n');
                    sb.Append(t.GetValue<string>());
                }
                return sb.Length == 0 ? null : sb.ToString();
            default:
                return null;
        }
    }
}
