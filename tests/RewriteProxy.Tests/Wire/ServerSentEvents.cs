using System.Text;
using System.Text.Json.Nodes;

namespace RewriteProxy.Tests.Wire;

/// <summary>Reads a server-sent event stream (WHATWG HTML, "Server-sent events": fields per line, events split by a blank line).</summary>
public static class ServerSentEvents
{
    public sealed record Message(string? Event, JsonObject Data);

    public static IReadOnlyList<Message> Read(byte[] utf8)
    {
        var messages = new List<Message>();
        foreach (var block in Encoding.UTF8.GetString(utf8).Split("\n\n", StringSplitOptions.RemoveEmptyEntries))
        {
            string? name = null;
            var data = new StringBuilder();
            foreach (var line in block.Split('\n'))
            {
                if (line.StartsWith("event: ", StringComparison.Ordinal)) name = line["event: ".Length..];
                else if (line.StartsWith("data: ", StringComparison.Ordinal)) data.Append(line["data: ".Length..]);
            }
            if (data.ToString() == "[DONE]") continue;
            messages.Add(new Message(name, JsonNode.Parse(data.ToString())!.AsObject()));
        }
        return messages;
    }
}
