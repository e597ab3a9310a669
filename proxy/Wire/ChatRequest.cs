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

    /// <summary>Parses and checks the shape the proxy relies on; a bad body is a <see cref="ChatRequestException"/> (400).</summary>
    /// <param name="utf8">The request body.</param>
    /// <param name="pathModel">The model named by the path (an Azure OpenAI deployment), used when the body names none.</param>
    public static ChatRequest Parse(ReadOnlySpan<byte> utf8, string? pathModel = null)
    {
        var body = WireJson.ParseObject(utf8);
        var model = WireJson.String(body["model"]) ?? pathModel;
        if (model is null) throw new ChatRequestException("'model' is required and must be a string.", "model");
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
        var stream = WireJson.Flag(body, "stream");
        var includeUsage = body["stream_options"] is JsonObject so && WireJson.Flag(so, "include_usage");
        return new ChatRequest
        {
            Body = body,
            Model = model,
            Messages = messages,
            Stream = stream,
            IncludeUsage = includeUsage,
        };
    }

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
