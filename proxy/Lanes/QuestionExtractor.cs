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
/// Finds the question: the text of the last user message of the request's chat-shaped view (a string, or the text parts
/// of an array), narrowed by the lane's QuestionPattern group <c>q</c> when one is set. A request its wire format
/// found uncacheable, or whose conversation holds tool turns or media, is bypassed.
/// </summary>
public static class QuestionExtractor
{
    public static Extraction Extract(LaneRequest request, LaneOptions lane)
    {
        if (request.Bypass is { } reason) return Extraction.Bypass(reason);

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
