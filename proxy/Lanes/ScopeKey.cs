using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// What must be equal for two calls to share an entry: lane, wire format and endpoint (path, query, version headers),
/// model, a fingerprint of every message but the question, the output-changing parameters, and the partition. Hashed,
/// so the key itself holds no text.
/// </summary>
public static class ScopeKey
{
    const string QuestionMarker = "\u0000question\u0000";

    public static string Compute(LaneOptions lane, LaneEndpoint endpoint, LaneRequest request, QuestionSite site, string partition,
        string versionHeaders)
    {
        var messages = (JsonArray)request.Messages.DeepClone();
        // The question's own text is replaced by a marker: the template around it (QuestionPattern) stays in the scope.
        var templated = site.MessageText[..site.Start] + QuestionMarker + site.MessageText[(site.Start + site.Length)..];
        var message = (JsonObject)messages[site.MessageIndex]!;
        message["content"] = templated;

        var canonical = new StringBuilder()
            .Append("lane=").Append(lane.Name.ToLowerInvariant()).Append('\n')
            .Append("endpoint=").Append(endpoint.ScopeText).Append('\n')
            .Append("headers=").Append(versionHeaders).Append('\n')
            .Append("model=").Append(request.Model).Append('\n')
            .Append("partition=").Append(partition).Append('\n')
            .Append("messages=").Append(Canonical(messages)).Append('\n')
            .Append("parameters=").Append(Canonical(request.Parameters));
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
