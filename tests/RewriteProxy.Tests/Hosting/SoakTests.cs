using System.Diagnostics;
using System.Text;
using RewriteProxy.Tests.Fixtures;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Hosting;

/// <summary>
/// The short soak: about a minute of mixed traffic against the real proxy process, watching its resident memory.
/// A leak per request shows as steady RSS growth once the bounded caches are full; a bounded cache does not.
/// </summary>
public sealed class SoakTests(ITestOutputHelper output) : UpstreamAndProxy
{
    /// <summary>Each test starts the proxy it needs.</summary>
    protected override bool StartsProxy => false;

    static readonly TimeSpan Duration = TimeSpan.FromSeconds(60);
    /// <summary>
    /// Long enough that every bounded structure is full before the first sample: the test asserts that more distinct
    /// misses than <see cref="MaxEntries"/> and <see cref="EmbeddingCacheSize"/> were made by then, and tiered JIT has
    /// long promoted the hot paths (thousands of calls; promotion needs 30, from memory).
    /// </summary>
    static readonly TimeSpan WarmUp = TimeSpan.FromSeconds(20);
    /// <summary>RSS is averaged over this window at each end, so one GC cycle's swing does not decide the result.</summary>
    static readonly TimeSpan Window = TimeSpan.FromSeconds(5);
    static readonly TimeSpan SampleEvery = TimeSpan.FromMilliseconds(500);
    /// <summary>Largest allowed RSS growth between the windows (the task's bound).</summary>
    const double MaxGrowth = 0.05;
    const int Concurrency = 8;
    /// <summary>Bounded on purpose, small enough to fill during the warm-up.</summary>
    const int MaxEntries = 200;
    const int EmbeddingCacheSize = 256;
    const int HitPool = 40;

    [Fact]
    [Trait("Category", "Soak")]
    public async Task A_minute_of_mixed_traffic_holds_memory_flat_after_warm_up_with_no_5xx()
    {
        Upstream.Completion = r => ScriptedUpstream.DraftAnswer(r) +
            "\nHow else could one ask: " + ScriptedUpstream.LastUserText(r);
        await using var proxy = await ProxyProcess.StartAsync(Upstream.BaseUrl, TestProxy.NewStorePath(), new Dictionary<string, string>
        {
            ["Lanes:draft:MaxDrift"] = "2",
            ["Lanes:siblings:Candidates"] = "lines",
            ["Store:MaxEntries"] = MaxEntries.ToString(),
            ["Embedding:CacheSize"] = EmbeddingCacheSize.ToString(),
            ["Logging:LogLevel:Default"] = "Warning",
        });
        var client = proxy.Client;

        var statuses = new System.Collections.Concurrent.ConcurrentDictionary<string, int>();
        var samples = new List<(TimeSpan At, long Rss)>();
        long misses = 0, missesAtWarmUp = -1;
        var watch = Stopwatch.StartNew();
        var workers = Enumerable.Range(0, Concurrency).Select(w => Task.Run(async () =>
        {
            var random = new Random(w);
            while (watch.Elapsed < Duration)
            {
                var kind = random.Next(100) switch
                {
                    < 35 => "hit",
                    < 65 => "miss",
                    < 85 => "passthrough",
                    _ => "stream",
                };
                int status;
                switch (kind)
                {
                    case "hit":
                        var lane = random.Next(2) == 0 ? "draft" : "siblings";
                        status = (await client.AskAsync(lane, $"When is the swimming pool {random.Next(HitPool)} open?", stream: random.Next(2) == 0)).Status;
                        break;
                    case "miss":
                        var n = Interlocked.Increment(ref misses);
                        status = (await client.AskAsync("draft", $"Which bus line stops at the depot number {n} in the harbour district?")).Status;
                        break;
                    case "passthrough":
                        using (var r = await client.PostAsync("/v1/chat/completions",
                                   new StringContent(LaneCalls.Request("Plain call " + random.Next()).ToJsonString(), Encoding.UTF8, "application/json")))
                        {
                            await r.Content.ReadAsByteArrayAsync();
                            status = (int)r.StatusCode;
                        }
                        break;
                    default:
                        using (var r = await client.PostAsync("/v1/chat/completions",
                                   new StringContent(LaneCalls.Request("Streamed call " + random.Next(), stream: true).ToJsonString(), Encoding.UTF8, "application/json")))
                        {
                            var body = await r.Content.ReadAsStringAsync();
                            status = body.EndsWith("data: [DONE]\n\n", StringComparison.Ordinal) ? (int)r.StatusCode : 599;
                        }
                        break;
                }
                statuses.AddOrUpdate($"{kind} {status}", 1, (_, c) => c + 1);
            }
        })).ToList();

        while (watch.Elapsed < Duration)
        {
            samples.Add((watch.Elapsed, proxy.ResidentBytes()));
            if (missesAtWarmUp < 0 && watch.Elapsed >= WarmUp) missesAtWarmUp = Interlocked.Read(ref misses);
            await Task.Delay(SampleEvery);
        }
        await Task.WhenAll(workers);

        var early = samples.Where(s => s.At >= WarmUp && s.At < WarmUp + Window).Average(s => (double)s.Rss);
        var late = samples.Where(s => s.At >= Duration - Window).Average(s => (double)s.Rss);
        var growth = late / early - 1;
        var total = statuses.Values.Sum();
        output.WriteLine($"requests {total} in {Duration.TotalSeconds} s ({total / Duration.TotalSeconds:0} per s); misses {misses}, " +
                         $"{missesAtWarmUp} by the warm-up's end");
        output.WriteLine($"RSS after warm-up {early / (1 << 20):0.0} MiB, at the end {late / (1 << 20):0.0} MiB, growth {growth:P2}; " +
                         $"peak {samples.Max(s => s.Rss) / (1 << 20):0.0} MiB");
        output.WriteLine(string.Join(", ", statuses.OrderBy(s => s.Key).Select(s => $"{s.Key}: {s.Value}")));

        Assert.True(missesAtWarmUp > Math.Max(MaxEntries, EmbeddingCacheSize),
            $"only {missesAtWarmUp} misses by the warm-up's end: the bounded caches were not yet full, so growth would be expected");
        Assert.DoesNotContain(statuses.Keys, k => int.Parse(k.Split(' ')[1]) >= 500);
        Assert.True(growth <= MaxGrowth, $"RSS grew {growth:P2} (from {early / (1 << 20):0.0} to {late / (1 << 20):0.0} MiB)");
    }
}
