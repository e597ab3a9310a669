using System.Text.Json;
using System.Text.Json.Nodes;

namespace RewriteProxy.Wire;

/// <summary>A parsed chat-completions request body, kept as a JSON tree so that every field we do not know survives.</summary>
public sealed class ChatRequest
{
    public required JsonObject Body { get; init; }
    public required string Model { get; init; }
    public required JsonArray Messages { get; init; }
    public bool Stream { get; init; }
    public bool IncludeUsage { get; init; }

    static readonly JsonDocumentOptions ReadOptions = new() { MaxDepth = 64 };

    /// <summary>Parses and checks the shape the proxy relies on; a bad body is a <see cref="ChatRequestException"/> (400).</summary>
    public static ChatRequest Parse(ReadOnlySpan<byte> utf8)
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
        if (root is not JsonObject body) throw new ChatRequestException("The request body must be a JSON object.");
        if (body["model"] is not JsonValue modelValue || modelValue.GetValueKind() != JsonValueKind.String)
            throw new ChatRequestException("'model' is required and must be a string.", "model");
        if (body["messages"] is not JsonArray messages)
            throw new ChatRequestException("'messages' is required and must be an array.", "messages");
        if (messages.Count == 0) throw new ChatRequestException("'messages' must not be empty.", "messages");
        foreach (var m in messages)
        {
            if (m is not JsonObject message || message["role"] is not JsonValue role || role.GetValueKind() != JsonValueKind.String)
                throw new ChatRequestException("Each message must be an object with a string 'role'.", "messages");
            switch (message["content"])
            {
                case null:
                case JsonValue v when v.GetValueKind() is JsonValueKind.String or JsonValueKind.Null:
                    break;
                case JsonArray parts when parts.All(p => p is JsonObject):
                    break;
                default:
                    throw new ChatRequestException("A message's 'content' must be a string or an array of content-part objects.", "messages");
            }
        }
        var stream = Flag(body, "stream");
        var includeUsage = body["stream_options"] is JsonObject so && Flag(so, "include_usage");
        return new ChatRequest
        {
            Body = body,
            Model = modelValue.GetValue<string>(),
            Messages = messages,
            Stream = stream,
            IncludeUsage = includeUsage,
        };
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
                var text = v.GetValue<string>();
                if (!IsWellFormed(text)) throw new ChatRequestException("The request body holds a string with an unpaired surrogate escape.");
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

    static bool Flag(JsonObject o, string name) => o[name] switch
    {
        null => false,
        JsonValue v when v.GetValueKind() == JsonValueKind.True => true,
        JsonValue v when v.GetValueKind() is JsonValueKind.False or JsonValueKind.Null => false,
        _ => throw new ChatRequestException($"'{name}' must be a boolean.", name),
    };

    /// <summary>The body to send upstream for a lane miss: never streamed (the proxy guards the whole answer first).</summary>
    public byte[] UpstreamBody()
    {
        var copy = (JsonObject)Body.DeepClone();
        copy.Remove("stream");
        copy.Remove("stream_options");
        return JsonSerializer.SerializeToUtf8Bytes(copy);
    }
}

/// <summary>A client request the proxy cannot read; answered with 400 and this message.</summary>
public sealed class ChatRequestException(string message, string? param = null) : Exception(message)
{
    public string? Param { get; } = param;
}
