using System.Net.Http.Headers;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>A lane call's answer as the client saw it.</summary>
public sealed record LaneReply(HttpResponseMessage Response, string Body)
{
    public string Cache => Header("X-Rewrite-Cache") ?? "";
    public string? Header(string name) =>
        Response.Headers.TryGetValues(name, out var v) ? string.Join(",", v) : null;
    public int Status => (int)Response.StatusCode;

    /// <summary>The assistant content, read from JSON or reassembled from server-sent events.</summary>
    public string Content
    {
        get
        {
            if (Response.Content.Headers.ContentType?.MediaType == "text/event-stream")
            {
                var sb = new StringBuilder();
                foreach (var line in Body.Split('\n'))
                {
                    if (!line.StartsWith("data: ", StringComparison.Ordinal) || line == "data: [DONE]") continue;
                    var chunk = JsonNode.Parse(line["data: ".Length..])!;
                    if (chunk["choices"]!.AsArray().FirstOrDefault()?["delta"]?["content"] is JsonValue v) sb.Append(v.GetValue<string>());
                }
                return sb.ToString();
            }
            return JsonNode.Parse(Body)!["choices"]![0]!["message"]!["content"]!.GetValue<string>();
        }
    }
}

public static class LaneCalls
{
    public static JsonObject Request(string question, string model = "scripted-model", string? system = null, bool stream = false)
    {
        var messages = new JsonArray();
        if (system is not null) messages.Add(new JsonObject { ["role"] = "system", ["content"] = system });
        messages.Add(new JsonObject { ["role"] = "user", ["content"] = question });
        var body = new JsonObject { ["model"] = model, ["messages"] = messages, ["temperature"] = 0 };
        if (stream) body["stream"] = true;
        return body;
    }

    /// <summary>One question to a lane, as the only user message.</summary>
    public static Task<LaneReply> AskAsync(this HttpClient client, string lane, string question, string? credential = "sk-tenant-a",
        bool stream = false, string? cacheControl = null) =>
        client.PostLaneAsync(lane, Request(question, stream: stream), credential, cacheControl);

    public static Task<LaneReply> AskAsync(this TestProxy proxy, string lane, string question, string? credential = "sk-tenant-a",
        bool stream = false, string? cacheControl = null) =>
        proxy.Client.AskAsync(lane, question, credential, stream, cacheControl);

    /// <summary>
    /// A lane call over any client (the in-process proxy's or a child process's): to <c>/lane/{lane}/v1/chat/completions</c>,
    /// or with <paramref name="viaHeader"/> to <c>/v1/chat/completions</c> with <c>X-Rewrite-Lane</c>.
    /// </summary>
    public static async Task<LaneReply> PostLaneAsync(this HttpClient client, string lane, JsonObject body, string? credential = "sk-tenant-a",
        string? cacheControl = null, bool viaHeader = false, CancellationToken cancel = default)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, viaHeader ? "/v1/chat/completions" : $"/lane/{lane}/v1/chat/completions")
        {
            Content = new StringContent(body.ToJsonString(), Encoding.UTF8, "application/json"),
        };
        if (viaHeader) request.Headers.Add("X-Rewrite-Lane", lane);
        if (credential is not null) request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", credential);
        if (cacheControl is not null) request.Headers.TryAddWithoutValidation("Cache-Control", cacheControl);
        var response = await client.SendAsync(request, cancel);
        return new LaneReply(response, await response.Content.ReadAsStringAsync(cancel));
    }
}
