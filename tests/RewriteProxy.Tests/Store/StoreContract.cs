using RewriteProxy.Cache;
using RewriteProxy.Store;

namespace RewriteProxy.Tests.Store;

/// <summary>
/// What every <see cref="IRewriteStore"/> must do, run unchanged against each store (one subclass per store). The
/// expectations come from the contract's own words (IRewriteStore.cs); where a filter is checked, the oracle is the
/// test's own evaluation of that filter over the rows it wrote, never the store's SQL.
/// </summary>
public abstract partial class StoreContract : IAsyncLifetime
{
    /// <summary>Settings of a new, empty place for a store (a file, a database): nothing is there until a store opens it read-write.</summary>
    protected abstract StoreOptions NewPlace();

    /// <summary>Destroys the store at <paramref name="place"/>, so that the next read-write open makes it anew (empty, another id).</summary>
    protected abstract Task MakeAnewAsync(StoreOptions place);

    /// <summary>True when anything of a store exists at <paramref name="place"/>.</summary>
    protected abstract Task<bool> ExistsAsync(StoreOptions place);

    /// <summary>Runs the store's sweep now (expiry, retention, change pruning with these limits) and waits for it.</summary>
    protected abstract Task SweepAsync(IRewriteStore store, TimeSpan keepChangesFor, long maxChangesKept);

    /// <summary>Every store this class opened, closed at the end.</summary>
    readonly List<IRewriteStore> _opened = [];

    protected static readonly CancellationToken None = CancellationToken.None;
    protected const string Model = "contract-model";

    /// <summary>A store at <paramref name="place"/> (a new place when null), opened.</summary>
    protected async Task<IRewriteStore> OpenAsync(StoreOptions? place = null, StoreAccess access = StoreAccess.ReadWrite,
        EventsOptions? events = null)
    {
        var store = StoreFactory.Create(place ?? NewPlace(), events ?? new EventsOptions(), Microsoft.Extensions.Logging.Abstractions.NullLoggerFactory.Instance);
        _opened.Add(store);
        await store.OpenAsync(access, None);
        return store;
    }

    public Task InitializeAsync() => Task.CompletedTask;

    public virtual async Task DisposeAsync()
    {
        foreach (var store in _opened) await store.DisposeAsync();
    }

    protected static NewEntry Entry(string question, string lane = "draft", string partition = "p-one", string scope = "scope-1",
        float[]? vector = null, string? model = Model, DateTimeOffset? created = null, string content = "a draft") =>
        new(scope, partition, lane, question, QuestionText.Normalize(question), vector ?? [1f, 0f, 0f], model,
            content, new EntryScores(0.25, 1, [0.25]), "gpt-test", 11, 22, created ?? DateTimeOffset.UtcNow);

    static readonly DateTimeOffset LongAgo = DateTimeOffset.UtcNow - TimeSpan.FromDays(365);

    [Fact]
    public async Task An_entry_is_found_exactly_by_scope_and_normal_form_while_young_enough()
    {
        var store = await OpenAsync();
        var created = DateTimeOffset.UtcNow - TimeSpan.FromMinutes(5);
        var id = await store.AddAsync(Entry("Where is the pool?", created: created), None);

        var found = await store.FindExactAsync("scope-1", QuestionText.Normalize("where is the POOL"), LongAgo, None);
        Assert.NotNull(found);
        Assert.Equal((id, "Where is the pool?", "a draft", "gpt-test", Model), (found.Id, found.Question, found.Content, found.ResponseModel, found.ModelId));
        Assert.Equal([0.25], found.Scores.Drifts);
        Assert.Equal((11L, 22L), (found.PromptTokens, found.CompletionTokens));
        Assert.Equal(created.ToUnixTimeMilliseconds(), found.Created.ToUnixTimeMilliseconds());
        Assert.Null(await store.FindExactAsync("scope-2", QuestionText.Normalize("Where is the pool?"), LongAgo, None));
        Assert.Null(await store.FindExactAsync("scope-1", QuestionText.Normalize("Where is the pool?"), DateTimeOffset.UtcNow, None));
    }

    [Fact]
    public async Task An_entry_is_read_by_id_while_it_exists_and_is_young_enough()
    {
        var store = await OpenAsync();
        var id = await store.AddAsync(Entry("When does the library open?"), None);

        Assert.Equal("When does the library open?", (await store.GetAsync(id, LongAgo, None))?.Question);
        Assert.Null(await store.GetAsync(id, DateTimeOffset.UtcNow + TimeSpan.FromSeconds(1), None));
        Assert.Null(await store.GetAsync(id + 1000, LongAgo, None));
    }

    [Fact]
    public async Task Adding_the_same_scope_and_question_replaces_the_entry_and_keeps_its_id()
    {
        var store = await OpenAsync();
        var first = await store.AddAsync(Entry("How do I renew a permit?", content: "old"), None);
        store.RecordHit(first, DateTimeOffset.UtcNow);
        await store.FlushAsync(None);
        var second = await store.AddAsync(Entry("how do I renew a permit", content: "new"), None);

        Assert.Equal(first, second);
        var entry = await store.GetAsync(first, LongAgo, None);
        Assert.Equal(("new", 0L), (entry!.Content, entry.HitCount));
        Assert.Single(await store.ListAsync(new EntryQuery(), None));
    }

    [Fact]
    public async Task A_hit_is_counted_and_moves_the_entry_to_the_front_of_the_listing()
    {
        var store = await OpenAsync();
        var older = await store.AddAsync(Entry("Which bins go out on Monday?", created: DateTimeOffset.UtcNow - TimeSpan.FromMinutes(2)), None);
        await store.AddAsync(Entry("Which bins go out on Tuesday?", created: DateTimeOffset.UtcNow - TimeSpan.FromMinutes(1)), None);
        var at = DateTimeOffset.UtcNow;
        store.RecordHit(older, at);
        store.RecordHit(older, at);
        await store.FlushAsync(None);

        var listed = await store.ListAsync(new EntryQuery(), None);
        Assert.Equal(older, listed[0].Id);
        Assert.Equal(2, listed[0].HitCount);
        Assert.Equal(at.ToUnixTimeMilliseconds(), listed[0].LastHit.ToUnixTimeMilliseconds());
    }

    [Fact]
    public async Task Vectors_are_read_for_one_model_with_the_sequence_they_are_current_to()
    {
        var store = await OpenAsync();
        var mine = await store.AddAsync(Entry("a", vector: [0f, 1f, 0f]), None);
        await store.AddAsync(Entry("b", model: "other-model"), None);
        await store.AddAsync(new NewEntry("scope-1", "p", "draft", "c", "c", null, null, "x", EntryScores.None, null, 0, 0, DateTimeOffset.UtcNow), None);

        var load = await store.ReadVectorsAsync(Model, None);

        var row = Assert.Single(load.Rows);
        Assert.Equal((mine, "scope-1"), (row.Id, row.ScopeKey));
        Assert.Equal([0f, 1f, 0f], row.Vector);
        var changes = await store.ChangesAfterAsync(0, 100, None);
        Assert.Equal(changes![^1].Sequence, load.Sequence);
        Assert.Empty((await store.ChangesAfterAsync(load.Sequence, 100, None))!);
    }

    [Fact]
    public async Task The_store_has_an_id_kept_across_opens_and_a_location()
    {
        var place = NewPlace();
        var first = await OpenAsync(place);
        var again = await OpenAsync(place);

        Assert.False(string.IsNullOrWhiteSpace(first.StoreId));
        Assert.Equal(first.StoreId, again.StoreId);
        Assert.False(string.IsNullOrWhiteSpace(first.Location));
        Assert.DoesNotContain("password", first.Location, StringComparison.OrdinalIgnoreCase);
    }

    [Fact]
    public async Task A_read_only_open_of_a_missing_store_fails_clearly_and_creates_nothing()
    {
        var place = NewPlace();

        var e = await Assert.ThrowsAsync<StoreException>(() => OpenAsync(place, StoreAccess.ReadOnly));

        Assert.False(string.IsNullOrWhiteSpace(e.Message));
        Assert.False(await ExistsAsync(place));
    }

    [Fact]
    public async Task A_read_only_store_reads_and_takes_no_writes()
    {
        var place = NewPlace();
        var writer = await OpenAsync(place);
        await writer.AddAsync(Entry("Is the museum free on Sundays?"), None);
        var reader = await OpenAsync(place, StoreAccess.ReadOnly);

        Assert.Equal(writer.StoreId, reader.StoreId);
        Assert.Single(await reader.ListAsync(new EntryQuery(), None));
        await Assert.ThrowsAsync<StoreException>(() => reader.AddAsync(Entry("Another question?"), None));
        reader.RecordHit(1, DateTimeOffset.UtcNow); // background writes never throw
        reader.Count("draft", Tally.TokensSaved);
        reader.AppendEvent(new EventRow(DateTimeOffset.UtcNow, "draft", "p", "rewrite", "q", "c", 0.1, "accepted", null));
        await reader.FlushAsync(None);
    }

    [Fact]
    public async Task Claims_of_one_process_are_granted_and_released()
    {
        var store = await OpenAsync();

        Assert.True(await store.ClaimMissAsync("scope-1", "where is the pool", TimeSpan.FromSeconds(5), None));
        await store.ReleaseMissAsync("scope-1", "where is the pool", None);
        Assert.False(await store.IsClaimedAsync("scope-1", "where is the pool", None));
    }
}
