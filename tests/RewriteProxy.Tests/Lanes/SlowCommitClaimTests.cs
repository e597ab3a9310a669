using System.Reflection;
using System.Runtime.ExceptionServices;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Logging;
using RewriteProxy.Lanes;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// Single flight across replicas when the store commits slowly: the miss is answered after <see cref="RewriteFlow.CommitWait"/>
/// without waiting for its entry, but its claim is held until the entry has landed. Released earlier, the claim would
/// tell the other replica's waiting call that the holder gave up, and it would ask upstream too (seen in a CI run on a
/// loaded machine: 7 upstream calls for 5 questions on 3 replicas).
/// </summary>
[Collection(PostgresCollection.Name)]
public sealed class SlowCommitClaimTests(PostgresCluster cluster) : IAsyncLifetime
{
    /// <summary>Longer than the commit wait, shorter than the claim's hold and Store:ClaimWait.</summary>
    static readonly TimeSpan CommitDelay = RewriteFlow.CommitWait * 2.5;

    ScriptedUpstream _upstream = null!;

    public async Task InitializeAsync() => _upstream = await ScriptedUpstream.StartAsync();

    public async Task DisposeAsync() => await _upstream.DisposeAsync();

    [Fact]
    public async Task A_claim_outlives_a_commit_slower_than_the_commit_wait_so_the_other_replica_is_served_its_entry()
    {
        const string question = "Which documents do I need to renew a fishing licence for a rowing boat?";
        // Long enough that the second call arrives while the first is upstream.
        _upstream.Delay = TimeSpan.FromMilliseconds(800);
        var db = await cluster.CreateDatabaseAsync();
        var settings = new Dictionary<string, string?>
        {
            ["Store:Provider"] = "postgres",
            ["Store:ConnectionString"] = db,
            ["Store:IndexSnapshotPath"] = "",
            ["Lanes:draft:MaxDrift"] = "2",
        };
        await using var one = await TestProxy.StartAsync(_upstream.BaseUrl, settings, SlowCommits);
        await using var two = await TestProxy.StartAsync(_upstream.BaseUrl, settings, SlowCommits);

        var first = one.AskAsync("draft", question);
        await Task.Delay(200);
        var second = two.AskAsync("draft", question);
        var replies = await Task.WhenAll(first, second);

        Assert.All(replies, r => Assert.Equal(200, (int)r.Response.StatusCode));
        Assert.Equal(replies[0].Content, replies[1].Content);
        Assert.Equal(1, _upstream.Requests.Count(r => r.BodyText.Contains(question)));
    }

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
