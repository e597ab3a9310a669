using System.Diagnostics;
using System.Reflection;
using System.Runtime.ExceptionServices;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Logging;
using RewriteProxy.Cache;
using RewriteProxy.Lanes;
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

    /// <summary>
    /// Single flight when the store commits slowly: the miss is answered after <see cref="RewriteFlow.CommitWait"/>
    /// without waiting for its entry, but its claim is held until the entry has landed. Released earlier, the claim would
    /// tell the other proxy's waiting call that the holder gave up, and it would ask upstream too (seen in a CI run on a
    /// loaded machine: 7 upstream calls for 5 questions on 3 replicas).
    /// </summary>
    [Fact]
    public async Task A_claim_outlives_a_commit_slower_than_the_commit_wait_so_the_other_proxy_is_served_its_entry()
    {
        const string question = "Which documents do I need to renew a fishing licence for a rowing boat?";
        // Long enough that the second call arrives while the first is upstream.
        Upstream.Delay = TimeSpan.FromMilliseconds(800);
        var settings = await OnePlaceAsync();
        await using var first = await StartProxyAsync(settings, SlowCommits);
        await using var second = await StartProxyAsync(settings, SlowCommits);

        var one = first.AskAsync("draft", question);
        await Task.Delay(200);
        var two = second.AskAsync("draft", question);
        var replies = await Task.WhenAll(one, two);

        Assert.All(replies, r => Assert.Equal(200, (int)r.Response.StatusCode));
        Assert.Equal(replies[0].Content, replies[1].Content);
        Assert.Equal(1, Upstream.Requests.Count(r => r.BodyText.Contains(question)));
    }

    /// <summary>Longer than the commit wait, shorter than the claim's hold and Store:ClaimWait.</summary>
    static readonly TimeSpan CommitDelay = RewriteFlow.CommitWait * 2.5;

    /// <summary>Every entry's commit takes <see cref="CommitDelay"/> longer; everything else is the real store.</summary>
    static void SlowCommits(IServiceCollection services) => services.AddSingleton(sp =>
    {
        var options = sp.GetRequiredService<RewriteProxyOptions>();
        var inner = StoreFactory.Create(options.Store, options.Events, sp.GetRequiredService<ILoggerFactory>());
        var store = DispatchProxy.Create<IRewriteStore, SlowCommitStore>();
        ((SlowCommitStore)(object)store).Inner = inner;
        return store;
    });

    public class SlowCommitStore : DispatchProxy
    {
        public IRewriteStore Inner { get; set; } = null!;

        protected override object? Invoke(MethodInfo? method, object?[]? args)
        {
            if (method!.Name == nameof(IRewriteStore.AddAsync)) return AddLateAsync((NewEntry)args![0]!, (CancellationToken)args[1]!);
            try
            {
                return method.Invoke(Inner, args);
            }
            catch (TargetInvocationException e) when (e.InnerException is not null)
            {
                ExceptionDispatchInfo.Throw(e.InnerException);
                throw;
            }
        }

        async Task<long> AddLateAsync(NewEntry entry, CancellationToken cancel)
        {
            await Task.Delay(CommitDelay, cancel);
            return await Inner.AddAsync(entry, cancel);
        }
    }
}
