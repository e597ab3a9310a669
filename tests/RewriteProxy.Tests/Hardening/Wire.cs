using System.Diagnostics;
using System.Globalization;
using System.Net.Http.Headers;
using System.Text;
using System.Text.Json.Nodes;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Hardening;

/// <summary>Calls and readings shared by the hardening tests, over any HttpClient (in-process proxy or child process).</summary>
public static class Wire
{
    public static async Task<LaneReply> PostLaneAsync(this HttpClient client, string lane, JsonObject body,
        string? credential = "sk-tenant-a", string? cacheControl = null, CancellationToken cancel = default)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, $"/lane/{lane}/v1/chat/completions")
        {
            Content = new StringContent(body.ToJsonString(), Encoding.UTF8, "application/json"),
        };
        if (credential is not null) request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", credential);
        if (cacheControl is not null) request.Headers.TryAddWithoutValidation("Cache-Control", cacheControl);
        var response = await client.SendAsync(request, cancel);
        return new LaneReply(response, await response.Content.ReadAsStringAsync(cancel));
    }

    public static Task<LaneReply> AskAsync(this HttpClient client, string lane, string question, string? credential = "sk-tenant-a",
        bool stream = false, string? cacheControl = null) =>
        client.PostLaneAsync(lane, LaneCalls.Request(question, stream: stream), credential, cacheControl);

    /// <summary>
    /// Sum of the samples of one counter in the Prometheus text exposition format (name{labels} value) whose label set
    /// contains <paramref name="labelPart"/> (e.g. <c>reason="store"</c>), or all of them when it is null.
    /// Counters are process-global, so tests compare before and after, never absolute values.
    /// </summary>
    public static async Task<double> CounterAsync(HttpClient client, string name, string? labelPart = null)
    {
        var text = await client.GetStringAsync("/metrics");
        double sum = 0;
        foreach (var line in text.Split('\n'))
        {
            if (!line.StartsWith(name, StringComparison.Ordinal) || line.Length <= name.Length) continue;
            var rest = line[name.Length..];
            if (rest[0] != '{' && rest[0] != ' ') continue; // another series sharing the prefix
            if (labelPart is not null && !rest.Contains(labelPart, StringComparison.Ordinal)) continue;
            sum += double.Parse(rest[(rest.LastIndexOf(' ') + 1)..], CultureInfo.InvariantCulture);
        }
        return sum;
    }

    public static async Task WaitUntilAsync(Func<bool> condition, TimeSpan within, string what)
    {
        var watch = Stopwatch.StartNew();
        while (!condition())
        {
            if (watch.Elapsed > within) Assert.Fail($"{what}: not within {within}");
            await Task.Delay(50);
        }
    }
}
