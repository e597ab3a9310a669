using System.Text.Json;
using System.Text.Json.Nodes;

namespace RewriteProxy.Wire;

/// <summary>Strict reading of client JSON, shared by every wire format, and small typed getters over the tree.</summary>
public static class WireJson
{
    static readonly JsonDocumentOptions ReadOptions = new() { MaxDepth = 64 };

    /// <summary>
    /// Parses a request body that must be a JSON object. Invalid UTF-8, invalid JSON, a repeated property name or an
    /// unpaired surrogate is a <see cref="ChatRequestException"/>: a 400 here, never an exception later.
    /// </summary>
    public static JsonObject ParseObject(ReadOnlySpan<byte> utf8)
    {
        if (!System.Text.Unicode.Utf8.IsValid(utf8))
            throw new ChatRequestException("The request body is not valid UTF-8.");
        JsonNode? root;
        try
        {
            root = JsonNode.Parse(utf8, documentOptions: ReadOptions);
            // JsonNode builds objects lazily: walk the tree now, so duplicate keys and unpaired surrogates are a
            // 400 here instead of an exception wherever the tree is first read.
            CheckTree(root);
        }
        catch (JsonException e)
        {
            throw new ChatRequestException($"The request body is not valid JSON: {e.Message}");
        }
        catch (ArgumentException e)
        {
            throw new ChatRequestException($"The request body has a repeated property name: {e.Message}");
        }
        catch (InvalidOperationException e)
        {
            throw new ChatRequestException($"The request body cannot be read: {e.Message}");
        }
        return root as JsonObject ?? throw new ChatRequestException("The request body must be a JSON object.");
    }

    /// <summary>Parses an upstream answer that must be a JSON object; anything else is a <see cref="FormatException"/>.</summary>
    public static JsonObject ParseAnswer(ReadOnlySpan<byte> utf8)
    {
        try
        {
            return JsonNode.Parse(utf8, documentOptions: ReadOptions) as JsonObject
                   ?? throw new FormatException("the upstream answer is not a JSON object");
        }
        catch (Exception e) when (e is JsonException or ArgumentException)
        {
            throw new FormatException("the upstream answer is not valid JSON", e);
        }
    }

    static void CheckTree(JsonNode? node)
    {
        switch (node)
        {
            case JsonObject o:
                foreach (var (_, value) in o) CheckTree(value);
                break;
            case JsonArray a:
                foreach (var value in a) CheckTree(value);
                break;
            case JsonValue v when v.GetValueKind() == JsonValueKind.String:
                if (!IsWellFormed(v.GetValue<string>()))
                    throw new ChatRequestException("The request body holds a string with an unpaired surrogate escape.");
                break;
        }
    }

    static bool IsWellFormed(string text)
    {
        for (var i = 0; i < text.Length; i++)
        {
            if (!char.IsSurrogate(text[i])) continue;
            if (char.IsHighSurrogate(text[i]) && i + 1 < text.Length && char.IsLowSurrogate(text[i + 1])) i++;
            else return false;
        }
        return true;
    }

    /// <summary>A boolean field: absent or null is false; any other type is a 400.</summary>
    public static bool Flag(JsonObject o, string name) => o[name] switch
    {
        null => false,
        JsonValue v when v.GetValueKind() == JsonValueKind.True => true,
        JsonValue v when v.GetValueKind() is JsonValueKind.False or JsonValueKind.Null => false,
        _ => throw new ChatRequestException($"'{name}' must be a boolean.", name),
    };

    /// <summary>The string value of a node, or null when it is absent or not a string.</summary>
    public static string? String(JsonNode? node) =>
        node is JsonValue v && v.GetValueKind() == JsonValueKind.String ? v.GetValue<string>() : null;

    /// <summary>A whole number, or 0 when absent or not one (token counts of an answer).</summary>
    public static int Int(JsonNode? node) =>
        node is JsonValue v && v.GetValueKind() == JsonValueKind.Number && v.TryGetValue<int>(out var i) ? i : 0;

    /// <summary>True when a field is present with a value other than null, false, an empty array or an empty object.</summary>
    public static bool IsSet(JsonNode? node) => node switch
    {
        null => false,
        JsonArray a => a.Count > 0,
        JsonObject o => o.Count > 0,
        JsonValue v => v.GetValueKind() is not (JsonValueKind.Null or JsonValueKind.False),
        _ => true,
    };

    /// <summary>
    /// The body a lane miss sends upstream: the client's own, less <c>stream</c> and <c>stream_options</c>, since the
    /// proxy guards the whole answer before any of it goes out.
    /// </summary>
    public static byte[] WithoutStreaming(JsonObject body)
    {
        var copy = (JsonObject)body.DeepClone();
        copy.Remove("stream");
        copy.Remove("stream_options");
        return JsonSerializer.SerializeToUtf8Bytes(copy);
    }

    /// <summary>The body's fields less the named ones, deep-copied: the output-changing parameters of a scope.</summary>
    public static JsonObject Without(JsonObject body, IReadOnlySet<string> names)
    {
        var parameters = new JsonObject();
        foreach (var (name, value) in body)
            if (!names.Contains(name)) parameters[name] = value?.DeepClone();
        return parameters;
    }
}
