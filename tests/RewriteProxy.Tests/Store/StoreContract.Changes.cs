using RewriteProxy.Store;

namespace RewriteProxy.Tests.Store;

/// <summary>The change feed: every store, replace, purge, eviction and expiry is a change, in commit order, signalled.</summary>
public abstract partial class StoreContract
{
    static async Task<IReadOnlyList<StoreChange>> AllChangesAsync(IRewriteStore store) =>
        (await store.ChangesAfterAsync(0, 10_000, None)) ?? throw new InvalidOperationException("the store forgot changes");

    [Fact]
    public async Task Stores_replaces_and_purges_are_changes_in_commit_order()
    {
        var store = await OpenAsync();
        var a = await store.AddAsync(Entry("Where is the pool?", vector: [0f, 0f, 1f]), None);
        var b = await store.AddAsync(Entry("Where is the gym?", scope: "scope-2"), None);
        await store.AddAsync(Entry("where is the pool", vector: [0f, 1f, 0f]), None);
        await store.PurgeAsync(new PurgeFilter(Id: b), None);

        var changes = await AllChangesAsync(store);

        Assert.Equal([(a, ChangeKind.Put), (b, ChangeKind.Put), (a, ChangeKind.Put), (b, ChangeKind.Delete)],
            changes.Select(c => (c.EntryId, c.Kind)));
        Assert.True(changes.Zip(changes.Skip(1)).All(p => p.First.Sequence < p.Second.Sequence), "sequences increase");
        // A put carries the entry as it is now (the replacement's vector); a delete carries nothing.
        Assert.Equal(("scope-1", Model), (changes[2].ScopeKey, changes[2].ModelId));
        Assert.Equal([0f, 1f, 0f], changes[2].Vector!);
        Assert.Null(changes[3].Vector);
        var later = await store.ChangesAfterAsync(changes[1].Sequence, 10_000, None);
        Assert.Equal(changes.Skip(2).Select(c => c.Sequence), later!.Select(c => c.Sequence));
        Assert.Equal([changes[0].Sequence], (await store.ChangesAfterAsync(0, 1, None))!.Select(c => c.Sequence));
    }

    [Fact]
    public async Task An_entry_stored_without_a_vector_is_a_put_without_one()
    {
        var store = await OpenAsync();
        var id = await store.AddAsync(new NewEntry("scope-1", "p", "draft", "whole message", "whole message", null, null, "x",
            EntryScores.None, null, 0, 0, DateTimeOffset.UtcNow), None);

        var change = Assert.Single(await AllChangesAsync(store));
        Assert.Equal((id, ChangeKind.Put), (change.EntryId, change.Kind));
        Assert.Null(change.Vector);
    }

    [Fact]
    public async Task Evictions_beyond_max_entries_are_delete_changes()
    {
        var place = NewPlace() with { MaxEntries = 2 };
        var store = await OpenAsync(place);
        var first = await store.AddAsync(Entry("one", created: DateTimeOffset.UtcNow - TimeSpan.FromMinutes(3)), None);
        await store.AddAsync(Entry("two", created: DateTimeOffset.UtcNow - TimeSpan.FromMinutes(2)), None);
        await store.AddAsync(Entry("three", created: DateTimeOffset.UtcNow - TimeSpan.FromMinutes(1)), None);
        await store.FlushAsync(None);

        var deletes = (await AllChangesAsync(store)).Where(c => c.Kind == ChangeKind.Delete).ToList();
        Assert.Equal([first], deletes.Select(c => c.EntryId));
        Assert.Equal(2, (await store.ListAsync(new EntryQuery(), None)).Count);
    }

    [Fact]
    public async Task Expired_entries_are_deleted_by_the_sweep_as_delete_changes()
    {
        var store = await OpenAsync(NewPlace() with { Ttl = TimeSpan.FromHours(1) });
        var old = await store.AddAsync(Entry("old", created: DateTimeOffset.UtcNow - TimeSpan.FromHours(2)), None);
        var fresh = await store.AddAsync(Entry("fresh"), None);

        await SweepAsync(store, TimeSpan.FromDays(1), 1_000_000);

        var deletes = (await AllChangesAsync(store)).Where(c => c.Kind == ChangeKind.Delete).ToList();
        Assert.Equal([old], deletes.Select(c => c.EntryId));
        Assert.Equal([fresh], (await store.ListAsync(new EntryQuery(), None)).Select(e => e.Id));
    }

    [Fact]
    public async Task Changes_pruned_away_make_a_reader_from_before_them_rebuild()
    {
        var store = await OpenAsync();
        foreach (var q in new[] { "a", "b", "c" }) await store.AddAsync(Entry(q), None);
        var all = await AllChangesAsync(store);

        await SweepAsync(store, TimeSpan.FromDays(1), maxChangesKept: 1);

        Assert.Null(await store.ChangesAfterAsync(0, 100, None));
        Assert.Null(await store.ChangesAfterAsync(all[0].Sequence, 100, None));
        Assert.Equal([all[2].Sequence], (await store.ChangesAfterAsync(all[1].Sequence, 100, None))!.Select(c => c.Sequence));
        Assert.Empty((await store.ChangesAfterAsync(all[2].Sequence, 100, None))!);
    }

    [Fact]
    public async Task A_store_made_anew_has_another_id_and_forgets_the_old_sequences()
    {
        var place = NewPlace();
        var before = await OpenAsync(place);
        foreach (var q in new[] { "a", "b" }) await before.AddAsync(Entry(q), None);
        var (oldId, oldSequence) = (before.StoreId, (await AllChangesAsync(before))[^1].Sequence);
        await before.DisposeAsync();

        await MakeAnewAsync(place);
        var after = await OpenAsync(place);

        Assert.NotEqual(oldId, after.StoreId);
        Assert.Null(await after.ChangesAfterAsync(oldSequence, 100, None));
        Assert.Empty(await after.ListAsync(new EntryQuery(), None));
    }

    [Fact]
    public async Task Changes_available_is_raised_after_commits_that_wrote_changes()
    {
        var store = await OpenAsync();
        var raised = 0;
        store.ChangesAvailable += () => Interlocked.Increment(ref raised);

        var id = await store.AddAsync(Entry("Is parking free on Sunday?"), None);
        await WaitUntilAsync(() => Volatile.Read(ref raised) >= 1);
        await store.PurgeAsync(new PurgeFilter(Id: id), None);
        await WaitUntilAsync(() => Volatile.Read(ref raised) >= 2);
    }

    static async Task WaitUntilAsync(Func<bool> done)
    {
        var waited = System.Diagnostics.Stopwatch.StartNew();
        while (!done() && waited.Elapsed < TimeSpan.FromSeconds(5)) await Task.Delay(10);
        Assert.True(done(), "not within 5 s");
    }
}
