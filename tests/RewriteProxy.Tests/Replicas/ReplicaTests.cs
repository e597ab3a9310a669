using System.Diagnostics;
using RewriteProxy.Tests.Fixtures;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Replicas;

/// <summary>
/// Issue #14's replica scenarios: three proxy processes share one PostgreSQL database (Debian's postgresql package, a
/// throwaway cluster started by <see cref="PostgresCluster"/>). Propagation is measured with only-if-cached probes
/// (RFC 9111 §5.2.1.7), which never call upstream and never store, so measuring does not change what is measured.
/// </summary>
/// <remarks>A cluster of its own: one scenario stops the server.</remarks>
public sealed class ReplicaTests(PostgresCluster cluster, ITestOutputHelper output) : IClassFixture<PostgresCluster>, IAsyncLifetime
{
    /// <summary>The issue's bound for an entry, a purge or an expiry to reach every replica.</summary>
    static readonly TimeSpan Propagation = TimeSpan.FromSeconds(2);

    /// <summary>A paraphrase pair the shipped model and decision serve as a semantic hit (LaneStoreTests uses it too).</summary>
    const string Question = "How do I reset the PIN of my library card?";
    const string Paraphrase = "How can I reset my library card PIN?";

    ScriptedUpstream _upstream = null!;

    public async Task InitializeAsync() => _upstream = await ScriptedUpstream.StartAsync();

    public async Task DisposeAsync()
    {
        if (!cluster.Running) await cluster.StartAsync();
        await _upstream.DisposeAsync();
    }

    int UpstreamCallsFor(string question) =>
        _upstream.Requests.Count(r => r.Path.EndsWith("/chat/completions", StringComparison.Ordinal) && r.BodyText.Contains(question));

    [Fact]
    public async Task An_entry_stored_by_one_replica_is_an_exact_and_a_semantic_hit_on_the_others_within_2_s()
    {
        await using var set = await ReplicaSet.StartAsync(cluster, _upstream);
        // A first lane call per process (code paths compiled, the model's first run), so the delay below is propagation.
        foreach (var replica in set.All) await replica.Client.AskAsync("draft", "Warm-up question about parking permits?", cacheControl: "only-if-cached");

        var miss = await set[0].Client.AskAsync("draft", Question);
        Assert.Equal("miss", miss.Cache);

        // Both other replicas probed at once, from the moment the miss was answered.
        var delays = await Task.WhenAll(new[] { set[1], set[2] }.Select(other =>
            ReplicaSet.ProbeUntilAsync(other, Paraphrase, r => r.Cache == "hit-semantic", Propagation)));
        output.WriteLine($"semantic hit on the other replicas after {string.Join(" and ", delays.Select(d => d is { } t ? $"{t.TotalMilliseconds:0} ms" : "never"))}");
        Assert.All(delays, d => Assert.True(d is not null, $"a replica served no semantic hit within {Propagation.TotalSeconds} s"));
        foreach (var other in new[] { set[1], set[2] })
        {
            var exact = await other.Client.AskAsync("draft", Question, cacheControl: "only-if-cached");
            Assert.Equal("hit-exact", exact.Cache);
            Assert.Equal(miss.Content, exact.Content);
        }
        Assert.Equal(1, UpstreamCallsFor(Question));
    }

    [Fact]
    public async Task Tenants_stay_apart_across_replicas()
    {
        await using var set = await ReplicaSet.StartAsync(cluster, _upstream);

        Assert.Equal("miss", (await set[0].Client.AskAsync("draft", Question, credential: "sk-tenant-one")).Cache);
        Assert.NotNull(await ReplicaSet.ProbeUntilAsync(set[1], Paraphrase, r => r.Cache == "hit-semantic", Propagation, "sk-tenant-one"));

        // Tenant two, on every replica: nothing of tenant one's is served, exactly or semantically.
        foreach (var replica in set.All)
        {
            Assert.Equal(504, (await replica.Client.AskAsync("draft", Question, "sk-tenant-two", cacheControl: "only-if-cached")).Status);
            Assert.Equal(504, (await replica.Client.AskAsync("draft", Paraphrase, "sk-tenant-two", cacheControl: "only-if-cached")).Status);
        }
        Assert.Equal("miss", (await set[2].Client.AskAsync("draft", Question, credential: "sk-tenant-two")).Cache);
        Assert.Equal(2, UpstreamCallsFor(Question));
    }

    [Fact]
    public async Task Concurrent_identical_misses_on_three_replicas_cost_one_upstream_call_each()
    {
        // Long enough that the three calls overlap although they leave a few milliseconds apart.
        _upstream.Delay = TimeSpan.FromMilliseconds(1500);
        await using var set = await ReplicaSet.StartAsync(cluster, _upstream);
        var questions = Enumerable.Range(1, 5).Select(i => $"Which documents do I need to renew residence permit category {i}?").ToList();

        var watch = Stopwatch.StartNew();
        foreach (var question in questions)
        {
            var replies = await Task.WhenAll(set.All.Select(r => r.Client.AskAsync("draft", question)));
            Assert.All(replies, r => Assert.Equal(200, r.Status));
            Assert.Single(replies.Select(r => r.Content).Distinct());
        }
        var calls = questions.Sum(UpstreamCallsFor);
        var scrapes = await Task.WhenAll(set.All.Select(r => MetricsExposition.ScrapeAsync(r.Client)));
        var served = scrapes.Sum(s => s.Sum("rewriteproxy_claim_waits_total", ("result", "served")));
        output.WriteLine($"{questions.Count * set.All.Count} calls, {calls} upstream calls, {served} served from another replica's call, " +
                         $"{watch.ElapsedMilliseconds} ms");
        Assert.Equal(questions.Count, calls);
        Assert.Equal(questions.Count * (set.All.Count - 1), served);
    }

    [Fact]
    public async Task A_purge_on_one_replica_reaches_every_replica_within_2_s()
    {
        await using var set = await ReplicaSet.StartAsync(cluster, _upstream);
        await set[0].Client.AskAsync("draft", Question);
        foreach (var replica in set.All)
            Assert.NotNull(await ReplicaSet.ProbeUntilAsync(replica, Paraphrase, r => r.Cache == "hit-semantic", Propagation));

        await ReplicaSet.PurgeAsync(set[0], """{"lane":"draft"}""");

        foreach (var replica in set.All)
        {
            foreach (var asked in new[] { Question, Paraphrase })
            {
                var gone = await ReplicaSet.ProbeUntilAsync(replica, asked, r => r.Status == 504, Propagation);
                Assert.True(gone is not null, $"{replica.Root} still served \"{asked}\" {Propagation.TotalSeconds} s after the purge");
                output.WriteLine($"purge reached {replica.Root} for \"{asked}\" after {gone!.Value.TotalMilliseconds:0} ms");
            }
        }
    }

    [Fact]
    public async Task Kill_9_of_one_replica_leaves_the_others_serving_and_its_claim_bounds_their_wait()
    {
        _upstream.Delay = TimeSpan.FromSeconds(2);
        var claimWait = TimeSpan.FromSeconds(3);
        await using var set = await ReplicaSet.StartAsync(cluster, _upstream,
            settings: new Dictionary<string, string> { ["Store:ClaimWait"] = "3s" });
        await set[2].Client.AskAsync("draft", Question);

        const string held = "What is the notice period for ending a garden allotment lease?";
        var onVictim = set[0].Client.AskAsync("draft", held);
        await Task.Delay(500); // the victim has claimed the question and is waiting on the upstream
        var watch = Stopwatch.StartNew();
        var waiting = set[1].Client.AskAsync("draft", held);
        await Task.Delay(300);
        set[0].Kill();
        await Assert.ThrowsAnyAsync<HttpRequestException>(() => onVictim);

        // The survivor serves from the cache meanwhile, and its waiter asks upstream itself once the wait runs out.
        Assert.Equal("hit-exact", (await set[2].Client.AskAsync("draft", Question)).Cache);
        var answer = await waiting;
        Assert.Equal(200, answer.Status);
        output.WriteLine($"the waiter on the killed replica's claim answered after {watch.ElapsedMilliseconds} ms (ClaimWait {claimWait.TotalSeconds} s)");
        Assert.True(watch.Elapsed < claimWait + _upstream.Delay + TimeSpan.FromSeconds(5), $"took {watch.Elapsed}");
        var timedOut = (await MetricsExposition.ScrapeAsync(set[1].Client)).Sum("rewriteproxy_claim_waits_total", ("result", "timed_out"));
        Assert.Equal(1, timedOut);
    }

    [Fact]
    public async Task PostgreSQL_stopped_under_traffic_fails_open_and_caching_resumes_when_it_is_back()
    {
        await using var set = await ReplicaSet.StartAsync(cluster, _upstream);
        await set[0].Client.AskAsync("draft", Question);

        await cluster.StopAsync();
        var slowest = TimeSpan.Zero;
        for (var i = 0; i < 6; i++)
        {
            foreach (var replica in set.All)
            {
                var watch = Stopwatch.StartNew();
                var reply = await replica.Client.AskAsync("draft", $"Where do I report a broken street light on road {i}?");
                slowest = watch.Elapsed > slowest ? watch.Elapsed : slowest;
                Assert.Equal(200, reply.Status);
            }
        }
        output.WriteLine($"slowest lane call with PostgreSQL down: {slowest.TotalMilliseconds:0} ms");
        var failOpen = (await Task.WhenAll(set.All.Select(r => MetricsExposition.ScrapeAsync(r.Client))))
            .Sum(s => s.Sum("rewriteproxy_fail_open_total", ("reason", "store")));
        Assert.True(failOpen > 0, "no fail-open was counted while the database was down");
        Assert.True(slowest < TimeSpan.FromSeconds(5), $"a call took {slowest} with the database down");

        await cluster.StartAsync();
        var back = Stopwatch.StartNew();
        const string after = "When does the recycling centre open on public holidays?";
        string? cache = null;
        while (back.Elapsed < TimeSpan.FromSeconds(60))
        {
            await set[1].Client.AskAsync("draft", after);
            cache = (await set[1].Client.AskAsync("draft", after)).Cache;
            if (cache == "hit-exact") break;
            await Task.Delay(250);
        }
        Assert.Equal("hit-exact", cache);
        output.WriteLine($"caching resumed {back.ElapsedMilliseconds} ms after PostgreSQL was started again");
        Assert.NotNull(await ReplicaSet.ProbeUntilAsync(set[2], after, r => r.Cache == "hit-exact", Propagation));
    }
}
