using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Wire.Responses;

/// <summary>
/// A whole Responses answer written as the API's event stream: <c>response.created</c>, <c>response.in_progress</c>,
/// then per message item <c>response.output_item.added</c>, <c>response.content_part.added</c>, the
/// <c>response.output_text.delta</c> pieces, <c>response.output_text.done</c>, <c>response.content_part.done</c>,
/// <c>response.output_item.done</c>, and last <c>response.completed</c> with the full response. Each event carries
/// its type in an <c>event:</c> line and a rising <c>sequence_number</c> (<see cref="EventStream"/>).
/// </summary>
public static class ResponsesEvents
{
    public static async Task WriteAsync(HttpContext context, JsonObject response)
    {
        var events = new EventStream { Numbered = true };

        var started = (JsonObject)response.DeepClone();
        started["status"] = "in_progress";
        started["output"] = new JsonArray();
        started["usage"] = null;
        events.Add("response.created", new JsonObject { ["response"] = started.DeepClone() });
        events.Add("response.in_progress", new JsonObject { ["response"] = started.DeepClone() });

        var output = response["output"] as JsonArray ?? [];
        for (var index = 0; index < output.Count; index++)
        {
            if (output[index] is not JsonObject item) continue;
            var itemId = WireJson.String(item["id"]) ?? "";
            var opened = (JsonObject)item.DeepClone();
            opened["status"] = "in_progress";
            opened["content"] = new JsonArray();
            events.Add("response.output_item.added", new JsonObject { ["output_index"] = index, ["item"] = opened });
            var parts = item["content"] as JsonArray ?? [];
            for (var part = 0; part < parts.Count; part++)
            {
                if (parts[part] is not JsonObject p || WireJson.String(p["type"]) != "output_text") continue;
                var text = WireJson.String(p["text"]) ?? "";
                JsonObject Where() => new() { ["item_id"] = itemId, ["output_index"] = index, ["content_index"] = part };
                var empty = (JsonObject)p.DeepClone();
                empty["text"] = "";
                var added = Where();
                added["part"] = empty;
                events.Add("response.content_part.added", added);
                foreach (var piece in CompletionWriter.Pieces(text))
                {
                    var delta = Where();
                    delta["delta"] = piece;
                    delta["logprobs"] = new JsonArray();
                    events.Add("response.output_text.delta", delta);
                }
                var done = Where();
                done["text"] = text;
                done["logprobs"] = new JsonArray();
                events.Add("response.output_text.done", done);
                var partDone = Where();
                partDone["part"] = p.DeepClone();
                events.Add("response.content_part.done", partDone);
            }
            events.Add("response.output_item.done", new JsonObject { ["output_index"] = index, ["item"] = item.DeepClone() });
        }
        events.Add("response.completed", new JsonObject { ["response"] = response.DeepClone() });
        await events.WriteAsync(context);
    }
}
