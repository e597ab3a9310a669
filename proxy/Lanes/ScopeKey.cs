using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// What must be equal for two calls to share an entry: lane, model, a fingerprint of every message but the question,
/// the output-changing parameters, and the partition. Hashed, so the key itself holds no text.
/// </summary>
public static class ScopeKey
{
    /// <summary>
    /// Fields known not to change the completion's text. Every other field (temperature, top_p, max_tokens, seed, stop,
    /// response_format, penalties, logit_bias, reasoning settings, and any field added later) is part of the scope:
    /// an unknown field separates entries rather than risk serving an answer made under other settings.
    /// </summary>
    static readonly HashSet<string> OutputNeutral =
        ["messages", "model", "stream", "stream_options", "user", "metadata", "store", "service_tier", "prompt_cache_key", "safety_identifier"];

    const string QuestionMarker = "\u0000question\u0000";

    public static string Compute(LaneOptions lane, ChatRequest request, QuestionSite site, string partition)
    {
        var messages = (JsonArray)request.Messages.DeepClone();
        // The question's own text is replaced by a marker: the template around it (QuestionPattern) stays in the scope.
        var templated = site.MessageText[..site.Start] + QuestionMarker + site.MessageText[(site.Start + site.Length)..];
        var message = (JsonObject)messages[site.MessageIndex]!;
        message["content"] = templated;

        var parameters = new JsonObject();
        foreach (var (name, value) in request.Body)
            if (!OutputNeutral.Contains(name)) parameters[name] = value?.DeepClone();

        var canonical = new StringBuilder()
            .Append("lane=").Append(lane.Name.ToLowerInvariant()).Append('\n')
            .Append("model=").Append(request.Model).Append('\n')
            .Append("partition=").Append(partition).Append('\n')
            .Append("messages=").Append(Canonical(messages)).Append('\n')
            .Append("parameters=").Append(Canonical(parameters));
        return Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(canonical.ToString())));
    }

    /// <summary>JSON with object keys sorted, so equal content gives equal text.</summary>
    static string Canonical(JsonNode? node)
    {
        using var buffer = new MemoryStream();
        using (var writer = new Utf8JsonWriter(buffer))
            Write(writer, node);
        return Encoding.UTF8.GetString(buffer.ToArray());
    }

    static void Write(Utf8JsonWriter writer, JsonNode? node)
    {
        switch (node)
        {
            case null:
                writer.WriteNullValue();
                break;
            case JsonObject o:
                writer.WriteStartObject();
                foreach (var (k, v) in o.OrderBy(p => p.Key, StringComparer.Ordinal))
                {
                    writer.WritePropertyName(k);
                    Write(writer, v);
                }
                writer.WriteEndObject();
                break;
            case JsonArray a:
                writer.WriteStartArray();
                foreach (var v in a) Write(writer, v);
                writer.WriteEndArray();
                break;
            default:
                node.WriteTo(writer);
                break;
        }
    }

}
