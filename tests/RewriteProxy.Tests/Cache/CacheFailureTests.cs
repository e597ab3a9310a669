using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// The cache side failing under a running proxy in ways Lanes/LaneStoreTests does not cover: the disk filling up, and
/// the embedder throwing. design.md: such a failure never fails the request; the call is answered uncached and counted
/// in rewriteproxy_fail_open_total.
/// </summary>
public sealed class CacheFailureTests : UpstreamAndProxy
{
    protected override bool StartsProxy => false;

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    const string FailOpen = "rewriteproxy_fail_open_total";

    [Fact]
    public async Task A_full_disk_fails_open_counted_and_caching_resumes_once_space_is_freed()
    {
        using var mount = TmpfsMount.Create("2m");
        var storePath = Path.Combine(mount.Path, "store", "cache.db");
        await using var proxy = await StartProxyAsync(new Dictionary<string, string?>
        {
            ["Store:Path"] = storePath,
            ["Lanes:draft:MaxDrift"] = "0.9",
        });
        Assert.Equal("hit-exact", await TwiceAsync(proxy, "Where is the nearest defibrillator in the station?"));

        var filler = Path.Combine(mount.Path, "filler.bin");
        FillUntilFull(filler);
        var before = (await MetricsExposition.ScrapeAsync(proxy.Client)).Sum(FailOpen, ("reason", "store"));
        var questions = Enumerable.Range(1, 5).Select(i => $"How long is the waiting list for allotment plot {i}?").ToArray();
        var during = new List<LaneReply>();
        foreach (var q in questions)
        {
            during.Add(await proxy.AskAsync("draft", q));
            during.Add(await proxy.AskAsync("draft", q));
        }
        var after = (await MetricsExposition.ScrapeAsync(proxy.Client)).Sum(FailOpen, ("reason", "store"));

        Assert.All(during, r => Assert.Equal(200, r.Status));
        Assert.All(during, r => Assert.StartsWith("A draft answer: How long", r.Content));
        Assert.DoesNotContain(during, r => r.Cache.StartsWith("hit", StringComparison.Ordinal)); // nothing could be stored
        Assert.True(after - before >= questions.Length, $"fail-open count rose by {after - before}, expected at least {questions.Length}");
        // The entry stored before the disk filled is still served.
        Assert.Equal("hit-exact", (await proxy.AskAsync("draft", "Where is the nearest defibrillator in the station?")).Cache);

        File.Delete(filler);
        Assert.Equal("hit-exact", await TwiceAsync(proxy, "Is there step-free access to platform 4?"));
        Assert.Equal("hit-exact", await TwiceAsync(proxy, questions[0]));
    }

    static async Task<string> TwiceAsync(TestProxy proxy, string question)
    {
        var first = await proxy.AskAsync("draft", question);
        Assert.Equal(200, first.Status);
        return (await proxy.AskAsync("draft", question)).Cache;
    }

    /// <summary>Writes until the file system says ENOSPC (an IOException), then stops.</summary>
    static void FillUntilFull(string path)
    {
        var block = new byte[64 * 1024];
        using var file = new FileStream(path, FileMode.CreateNew, FileAccess.Write, FileShare.None, 0);
        try
        {
            while (true) file.Write(block);
        }
        catch (IOException)
        {
            // full
        }
    }

    [Fact]
    public async Task A_throwing_embedder_fails_open_uncached_and_counted_on_lookup_and_on_the_guard()
    {
        var embedder = new FaultyEmbedder(SharedEmbedder.Instance);
        await using var proxy = await StartProxyAsync(
            new Dictionary<string, string?> { ["Lanes:draft:MaxDrift"] = "0.9" },
            services => services.AddSingleton<IEmbedder>(embedder));
        const string question = "Can I bring a guest to the climbing wall?";

        embedder.Fail = FaultyEmbedder.Mode.Always;
        var before = (await MetricsExposition.ScrapeAsync(proxy.Client)).Sum(FailOpen, ("reason", "embedder"));
        var lookup1 = await proxy.AskAsync("draft", question);
        var lookup2 = await proxy.AskAsync("draft", question);
        var afterLookup = (await MetricsExposition.ScrapeAsync(proxy.Client)).Sum(FailOpen, ("reason", "embedder"));

        Assert.Equal([200, 200], new[] { lookup1.Status, lookup2.Status });
        Assert.Equal(["bypass", "bypass"], new[] { lookup1.Cache, lookup2.Cache });
        Assert.Equal("A draft answer: " + question, lookup2.Content);
        Assert.True(afterLookup - before >= 2, $"fail-open count rose by {afterLookup - before}");

        // Lookups embed the question; the guard embeds the rewrite. Failing only the latter hits the miss path.
        embedder.Question = question;
        embedder.Fail = FaultyEmbedder.Mode.Rewrites;
        var guard1 = await proxy.AskAsync("draft", question);
        var guard2 = await proxy.AskAsync("draft", question);
        var afterGuard = (await MetricsExposition.ScrapeAsync(proxy.Client)).Sum(FailOpen, ("reason", "embedder"));

        Assert.Equal([200, 200], new[] { guard1.Status, guard2.Status });
        Assert.Equal("miss", guard2.Cache); // nothing unguarded was stored
        Assert.Equal("A draft answer: " + question, guard2.Content);
        Assert.True(afterGuard - afterLookup >= 2, $"fail-open count rose by {afterGuard - afterLookup}");
        Assert.Equal(0, (await proxy.Services.GetRequiredService<IRewriteStore>().StatsAsync(CancellationToken.None)).Lanes.Sum(l => l.Entries));

        embedder.Fail = FaultyEmbedder.Mode.Never;
        Assert.Equal("miss", (await proxy.AskAsync("draft", question)).Cache);
        Assert.Equal("hit-exact", (await proxy.AskAsync("draft", question)).Cache);
        Assert.Equal(5, Upstream.ChatCalls); // two bypasses, two unguarded misses, one stored miss
    }
}
