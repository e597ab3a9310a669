using System.Diagnostics;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// The whole proxy on the PostgreSQL store (<c>Store:Provider = postgres</c>): the wiring from the settings to the
/// store, its change feed and the index follower. Two proxies on one database stand for two replicas.
/// </summary>
[Collection(PostgresCollection.Name)]
public sealed class PostgresLaneTests(PostgresCluster cluster) : UpstreamAndProxy
{
    protected override bool StartsProxy => false;

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    async Task<Dictionary<string, string?>> OnePlaceAsync() => new()
    {
        ["Store:Provider"] = "postgres",
        ["Store:ConnectionString"] = await cluster.CreateDatabaseAsync(),
        ["Lanes:draft:MaxDrift"] = "0.9",
    };

    [Fact]
    public async Task An_entry_stored_by_one_proxy_is_an_exact_and_a_semantic_hit_on_another_within_two_seconds()
    {
        var settings = await OnePlaceAsync();
        await using var first = await StartProxyAsync(settings);
        await using var second = await StartProxyAsync(settings);
        var follower = second.Services.GetRequiredService<IndexFollower>();

        Assert.Equal("miss", (await first.AskAsync("draft", "How do I reset the PIN of my library card?")).Cache);
        var newest = (await second.Services.GetRequiredService<IRewriteStore>().ChangesAfterAsync(0, 100, CancellationToken.None))![^1].Sequence;
        var clock = Stopwatch.StartNew();
        while (follower.Sequence < newest && clock.Elapsed < TimeSpan.FromSeconds(2)) await Task.Delay(10);

        Assert.True(follower.Sequence >= newest, $"the second proxy's index was at {follower.Sequence}, not {newest}, after 2 s");
        Assert.Equal("hit-exact", (await second.AskAsync("draft", "How do I reset the PIN of my library card?")).Cache);
        Assert.Equal("hit-semantic", (await second.AskAsync("draft", "How can I reset my library card PIN?")).Cache);
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task A_purge_on_one_proxy_is_never_served_by_the_other()
    {
        var settings = await OnePlaceAsync();
        await using var first = await StartProxyAsync(settings);
        await using var second = await StartProxyAsync(settings);
        await first.AskAsync("draft", "When does the swimming pool close?");
        Assert.Equal("hit-exact", (await second.AskAsync("draft", "When does the swimming pool close?")).Cache);

        await first.Services.GetRequiredService<IRewriteStore>().PurgeAsync(new PurgeFilter(Lane: "draft"), CancellationToken.None);

        Assert.Equal("miss", (await second.AskAsync("draft", "When does the swimming pool close?")).Cache);
        Assert.Equal(2, Upstream.ChatCalls);
    }
}
