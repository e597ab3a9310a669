using RewriteProxy.Store.Postgres;
using RewriteProxy.Tests.Fixtures;
using static RewriteProxy.Tests.Store.PostgresStoreKit;

namespace RewriteProxy.Tests.Store;

/// <summary>Claims on misses in flight, as two replicas (two store instances on one database) see them.</summary>
[Collection(PostgresCollection.Name)]
public sealed class PostgresClaimTests(PostgresCluster cluster) : IAsyncLifetime
{
    static readonly CancellationToken None = CancellationToken.None;
    static readonly TimeSpan Hold = TimeSpan.FromSeconds(30);
    const string Scope = "scope-a";
    const string Question = "when does the museum open on mondays";

    PostgresRewriteStore _one = null!;
    PostgresRewriteStore _two = null!;

    public async Task InitializeAsync()
    {
        var db = await cluster.CreateDatabaseAsync();
        _one = await OpenAsync(db);
        _two = await OpenAsync(db);
    }

    public async Task DisposeAsync()
    {
        await _one.DisposeAsync();
        await _two.DisposeAsync();
    }

    [Fact]
    public async Task A_claim_held_by_one_replica_is_seen_by_the_other_until_released()
    {
        Assert.False(await _two.IsClaimedAsync(Scope, Question, None));
        Assert.True(await _one.ClaimMissAsync(Scope, Question, Hold, None));

        Assert.True(await _two.IsClaimedAsync(Scope, Question, None));
        Assert.False(await _two.ClaimMissAsync(Scope, Question, Hold, None));
        Assert.True(await _one.ClaimMissAsync(Scope, Question, Hold, None)); // the holder may claim again
        Assert.True(await _two.ClaimMissAsync("another-scope", Question, Hold, None));
        Assert.True(await _two.ClaimMissAsync(Scope, "another question", Hold, None));

        await _two.ReleaseMissAsync(Scope, Question, None); // not its claim: nothing happens
        Assert.True(await _two.IsClaimedAsync(Scope, Question, None));
        await _one.ReleaseMissAsync(Scope, Question, None);
        Assert.False(await _two.IsClaimedAsync(Scope, Question, None));
        Assert.True(await _two.ClaimMissAsync(Scope, Question, Hold, None));
    }

    [Fact]
    public async Task A_crashed_holders_claim_lapses_after_its_hold()
    {
        var hold = TimeSpan.FromMilliseconds(400);
        Assert.True(await _one.ClaimMissAsync(Scope, Question, hold, None));
        await _one.DisposeAsync(); // gone without releasing
        Assert.False(await _two.ClaimMissAsync(Scope, Question, Hold, None));

        await Task.Delay(hold + TimeSpan.FromMilliseconds(200));

        Assert.False(await _two.IsClaimedAsync(Scope, Question, None));
        Assert.True(await _two.ClaimMissAsync(Scope, Question, Hold, None));
    }

    [Fact]
    public async Task Releasing_a_claim_wakes_the_other_replica()
    {
        Assert.True(await EventuallyAsync(() => Task.FromResult(_two.Listening), TimeSpan.FromSeconds(10)));
        Assert.True(await _one.ClaimMissAsync(Scope, Question, Hold, None));
        var woken = new TaskCompletionSource(TaskCreationOptions.RunContinuationsAsynchronously);
        _two.ChangesAvailable += () => woken.TrySetResult();

        await _one.ReleaseMissAsync(Scope, Question, None);

        await woken.Task.WaitAsync(TimeSpan.FromSeconds(2));
    }
}
