using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire.Messages;

/// <summary>
/// A whole Messages answer written as the API's event stream: <c>message_start</c> (the message with no content yet),
/// per text block <c>content_block_start</c>, the <c>content_block_delta</c> pieces and <c>content_block_stop</c>,
/// then <c>message_delta</c> (stop reason and output tokens) and <c>message_stop</c>. Every event has an
/// <c>event:</c> line: Anthropic's clients skip data without one.
/// </summary>
public static class MessagesEvents
{
    public static async Task WriteAsync(HttpContext context, JsonObject message)
    {
        var events = new EventStream();
        var usage = message["usage"] as JsonObject ?? [];
        var start = (JsonObject)message.DeepClone();
        start["content"] = new JsonArray();
        start["stop_reason"] = null;
        start["stop_sequence"] = null;
        var startUsage = (JsonObject)usage.DeepClone();
        startUsage["output_tokens"] = 0;
        start["usage"] = startUsage;
        events.Add("message_start", new JsonObject { ["message"] = start });

        var blocks = message["content"] as JsonArray ?? [];
        for (var index = 0; index < blocks.Count; index++)
        {
            var text = WireJson.String(blocks[index]?["text"]) ?? "";
            events.Add("content_block_start", new JsonObject
            {
                ["index"] = index,
                ["content_block"] = new JsonObject { ["type"] = "text", ["text"] = "" },
            });
            foreach (var piece in CompletionWriter.Pieces(text))
                events.Add("content_block_delta", new JsonObject
                {
                    ["index"] = index,
                    ["delta"] = new JsonObject { ["type"] = "text_delta", ["text"] = piece },
                });
            events.Add("content_block_stop", new JsonObject { ["index"] = index });
        }
        events.Add("message_delta", new JsonObject
        {
            ["delta"] = new JsonObject
            {
                ["stop_reason"] = message["stop_reason"]?.DeepClone() ?? "end_turn",
                ["stop_sequence"] = message["stop_sequence"]?.DeepClone(),
            },
            ["usage"] = new JsonObject { ["output_tokens"] = WireJson.Int(usage["output_tokens"]) },
        });
        events.Add("message_stop", []);
        await events.WriteAsync(context);
    }
}
