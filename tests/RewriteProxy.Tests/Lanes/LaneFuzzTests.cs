using System.Diagnostics;
using System.Net.Http.Headers;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// A bounded, seeded mutation fuzz of lane requests: valid requests with bytes flipped, inserted and deleted, JSON
/// values swapped for other types, fields dropped, huge numbers and odd unicode. Every answer must be one of the
/// statuses of the contract (design.md "Errors") with an OpenAI-shaped body on errors; never a 500, never a hang.
/// </summary>
public sealed class LaneFuzzTests : UpstreamAndProxy
{
    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?> { ["Limits:MaxRequestBytes"] = "16384" };

    // Whatever was forwarded, the upstream answers a plain completion: the proxy is under test, not the fixture.
    protected override void Script(ScriptedUpstream upstream) =>
        upstream.Handler = (context, _) => context.Response.WriteAsJsonAsync(
            ScriptedUpstream.Completed("scripted-model", "How do I renew a library card online?\nWhere can I renew a library card?"));

    const int Seed = 20240917;
    const int Cases = 2_000;
    /// <summary>Per request: far above a normal call's tens of milliseconds, far below a hang.</summary>
    static readonly TimeSpan PerRequest = TimeSpan.FromSeconds(10);
    /// <summary>The statuses design.md lists for lane calls, plus 200.</summary>
    static readonly HashSet<int> Allowed = [200, 400, 404, 413, 422, 502];
    /// <summary>Failures quoted in the message; the rest are counted.</summary>
    const int Quoted = 8;

    static readonly JsonObject[] Seeds =
    [
        LaneCalls.Request("How do I renew my library card?"),
        LaneCalls.Request("Which documents does the harbour office need?", system: "Write a short passage that answers the question."),
        LaneCalls.Request("When does the ferry leave on Sundays?", stream: true),
        JsonNode.Parse("""
            {"model":"scripted-model","temperature":0.2,"max_tokens":200,"stream":false,"stream_options":{"include_usage":true},
             "messages":[{"role":"system","content":"List related questions."},
                         {"role":"user","content":[{"type":"text","text":"Question: Can I swim in the reservoir?"}]}]}
            """)!.AsObject(),
    ];

    [Fact]
    public async Task Two_thousand_mutated_lane_requests_get_contract_statuses_and_the_proxy_still_answers()
    {
        var random = new Random(Seed);
        var failures = new List<string>();
        var statuses = new Dictionary<int, int>();
        var watch = Stopwatch.StartNew();
        for (var i = 0; i < Cases; i++)
        {
            var seed = Seeds[random.Next(Seeds.Length)];
            var lane = random.Next(2) == 0 ? "draft" : "siblings";
            var body = Mutate(random, seed);
            var (status, problem) = await SendAsync(lane, body);
            statuses[status] = statuses.GetValueOrDefault(status) + 1;
            if (problem is not null) failures.Add($"#{i} {lane} {status} {problem}: {Show(body)}");
        }
        var took = watch.Elapsed;

        var normal = await Proxy.AskAsync("draft", "Is the proxy still answering after the fuzz?");
        Assert.Equal(200, normal.Status);
        var summary = $"{Cases} cases in {took.TotalSeconds:0.0} s; statuses {string.Join(", ", statuses.OrderBy(s => s.Key).Select(s => $"{s.Key}×{s.Value}"))}";
        Assert.True(failures.Count == 0, $"{summary}; {failures.Count} broke the contract:\n" + string.Join("\n", failures.Take(Quoted)));
    }

    async Task<(int Status, string? Problem)> SendAsync(string lane, byte[] body)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, $"/lane/{lane}/v1/chat/completions") { Content = new ByteArrayContent(body) };
        request.Content.Headers.ContentType = new MediaTypeHeaderValue("application/json");
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", "sk-fuzz");
        using var cancel = new CancellationTokenSource(PerRequest);
        try
        {
            using var response = await Proxy.Client.SendAsync(request, cancel.Token);
            var status = (int)response.StatusCode;
            var text = await response.Content.ReadAsStringAsync(cancel.Token);
            if (!Allowed.Contains(status)) return (status, "status outside the contract");
            if (status != 200 && !IsOpenAiError(response, text)) return (status, "error body is not {\"error\":{message,type,code}}");
            return (status, null);
        }
        catch (OperationCanceledException)
        {
            return (0, $"no answer within {PerRequest}");
        }
        catch (HttpRequestException e)
        {
            return (0, "connection broke: " + e.Message);
        }
    }

    /// <summary>The error shape of the OpenAI API reference, as in Fixtures/OpenAiError.</summary>
    static bool IsOpenAiError(HttpResponseMessage response, string text)
    {
        if (response.Content.Headers.ContentType?.MediaType != "application/json") return false;
        try
        {
            using var doc = JsonDocument.Parse(text);
            var e = doc.RootElement.GetProperty("error");
            return e.GetProperty("message").ValueKind == JsonValueKind.String && e.GetProperty("type").ValueKind == JsonValueKind.String
                && e.GetProperty("code").ValueKind == JsonValueKind.String;
        }
        catch (Exception ex) when (ex is JsonException or KeyNotFoundException or InvalidOperationException)
        {
            return false;
        }
    }

    static string Show(byte[] body)
    {
        var text = Encoding.UTF8.GetString(body);
        return text.Length > 300 ? text[..300] + "…" : text;
    }

    // ---- mutations ----

    static readonly string[] OddText =
    [
        "\u0000", "\ud800", "\udfff", "\u202e", "\u200b", "\ufeff", "🚲🚲🚲", "東京の図書館はいつ開きますか?", "ﷺ", "e\u0301", "\\", "\"", "\n\r\t",
        new string('x', 20_000), "Question: ", "?",
    ];

    static readonly string[] HugeNumbers = ["1e400", "-1e400", "123456789012345678901234567890", "1e-400", "-0", "9223372036854775808", "0.0000000000000000000001"];

    static byte[] Mutate(Random random, JsonObject seed)
    {
        var tree = (JsonObject)seed.DeepClone();
        var treeMutations = random.Next(0, 3);
        for (var i = 0; i < treeMutations; i++) MutateTree(random, tree);
        var text = tree.ToJsonString(new JsonSerializerOptions { Encoder = System.Text.Encodings.Web.JavaScriptEncoder.UnsafeRelaxedJsonEscaping });
        if (random.Next(4) == 0) text = InjectRaw(random, text);
        var bytes = Encoding.UTF8.GetBytes(text).ToList();
        var byteMutations = random.Next(3) == 0 ? random.Next(1, 4) : 0;
        for (var i = 0; i < byteMutations; i++) MutateBytes(random, bytes);
        return bytes.ToArray();
    }

    /// <summary>Raw-text mutations JSON trees cannot express: huge number literals, lone-surrogate escapes, duplicate keys.</summary>
    static string InjectRaw(Random random, string text)
    {
        switch (random.Next(3))
        {
            case 0:
                return text.Replace("\"temperature\":0", "\"temperature\":" + HugeNumbers[random.Next(HugeNumbers.Length)]);
            case 1:
                var at = text.IndexOf("\"content\":\"", StringComparison.Ordinal);
                return at < 0 ? text : text.Insert(at + "\"content\":\"".Length, random.Next(2) == 0 ? "\\ud800" : "\\udc00\\u0000");
            default:
                return text.Insert(1, "\"model\":\"other\",\"messages\":[],");
        }
    }

    static void MutateBytes(Random random, List<byte> bytes)
    {
        if (bytes.Count == 0) return;
        var at = random.Next(bytes.Count);
        switch (random.Next(3))
        {
            case 0:
                bytes[at] ^= (byte)(1 << random.Next(8));
                break;
            case 1:
                bytes.Insert(at, (byte)random.Next(256));
                break;
            default:
                bytes.RemoveRange(at, Math.Min(bytes.Count - at, random.Next(1, 8)));
                break;
        }
    }

    static void MutateTree(Random random, JsonObject root)
    {
        var nodes = new List<JsonNode>();
        Collect(root, nodes);
        var target = nodes[random.Next(nodes.Count)];
        switch (random.Next(4))
        {
            case 0:
                Replace(target, OtherType(random));
                break;
            case 1:
                if (target.Parent is JsonObject po) po.Remove(target.GetPropertyName());
                else if (target.Parent is JsonArray pa) pa.Remove(target);
                break;
            case 2:
                Replace(target, JsonValue.Create(OddText[random.Next(OddText.Length)]));
                break;
            default:
                Replace(target, JsonNode.Parse(HugeNumbers[random.Next(2, HugeNumbers.Length)]));
                break;
        }
    }

    static void Collect(JsonNode node, List<JsonNode> into)
    {
        if (node.Parent is not null) into.Add(node);
        if (node is JsonObject o) foreach (var (_, child) in o.ToList()) { if (child is not null) Collect(child, into); }
        if (node is JsonArray a) foreach (var child in a.ToList()) { if (child is not null) Collect(child, into); }
        if (node.Parent is null && into.Count == 0) into.Add(node);
    }

    static void Replace(JsonNode target, JsonNode? with)
    {
        switch (target.Parent)
        {
            case JsonObject o:
                o[target.GetPropertyName()] = with;
                break;
            case JsonArray a:
                a[a.IndexOf(target)] = with;
                break;
        }
    }

    static JsonNode? OtherType(Random random) => random.Next(7) switch
    {
        0 => null,
        1 => JsonValue.Create(random.Next(2) == 0),
        2 => JsonValue.Create(random.Next(-5, 5)),
        3 => JsonValue.Create("x"),
        4 => new JsonArray(JsonValue.Create(1), JsonValue.Create("two")),
        5 => new JsonObject { ["role"] = "user" },
        _ => new JsonArray(),
    };
}
