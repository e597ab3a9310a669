using Microsoft.Extensions.Logging.Abstractions;
using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// The follower keeps a process's index in step with writes it did not make: a second store instance on the same
/// SQLite file stands in for another process (the single-process analogue of a replica on a shared database).
/// </summary>
public sealed class IndexFollowerTests : IAsyncLifetime
{
    const string Model = "follow-model";
    readonly string _path = TestProxy.NewStorePath();
    readonly VectorIndex _index = new(3);
    readonly HotEntries _hot = new();
    IRewriteStore _mine = null!;
    IRewriteStore _other = null!;
    IndexFollower _follower = null!;

    public async Task InitializeAsync()
    {
        _mine = await OpenAsync();
        _other = await OpenAsync();
        _follower = new IndexFollower(_mine, _index, _hot, Model, NullLogger.Instance);
    }

    async Task<IRewriteStore> OpenAsync()
    {
        var store = StoreFactory.Create(new StoreOptions { Path = _path }, new EventsOptions(), NullLoggerFactory.Instance);
        await store.OpenAsync(StoreAccess.ReadWrite, CancellationToken.None);
        return store;
    }

    public async Task DisposeAsync()
    {
        await _follower.DisposeAsync();
        await _mine.DisposeAsync();
        await _other.DisposeAsync();
        _index.Dispose();
        Directory.Delete(Path.GetDirectoryName(_path)!, recursive: true);
    }

    static NewEntry Entry(string question, float[] vector, string model = Model) =>
        new("scope-f", "p", "draft", question, QuestionText.Normalize(question), vector, model, "a draft", EntryScores.None, null, 1, 1,
            DateTimeOffset.UtcNow);

    /// <summary>Waits for <paramref name="done"/> at most the poll interval plus a margin for a loaded machine.</summary>
    static async Task<TimeSpan> WithinPollAsync(Func<bool> done)
    {
        var limit = IndexFollower.PollEvery + TimeSpan.FromSeconds(2);
        var waited = System.Diagnostics.Stopwatch.StartNew();
        while (!done() && waited.Elapsed < limit) await Task.Delay(10);
        Assert.True(done(), $"not within {limit.TotalSeconds} s");
        return waited.Elapsed;
    }

    [Fact]
    public async Task The_rebuild_loads_the_stored_vectors_of_the_model_and_the_sequence()
    {
        var kept = await _other.AddAsync(Entry("Where is the pool?", [1, 0, 0]), CancellationToken.None);
        await _other.AddAsync(Entry("Where is the gym?", [0, 1, 0], model: "another-model"), CancellationToken.None);

        await _follower.StartWithRebuildAsync();

        Assert.True(_follower.Ready);
        Assert.Equal([kept], _index.Search("scope-f", [1, 0, 0], 4, 0.5f).Select(r => r.Id));
        Assert.Equal(1, _index.Count);
        Assert.Equal((await _mine.ChangesAfterAsync(0, 100, CancellationToken.None))![^1].Sequence, _follower.Sequence);
    }

    [Fact]
    public async Task An_entry_another_process_stores_or_deletes_reaches_the_index_within_the_poll()
    {
        await _follower.StartWithRebuildAsync();

        var id = await _other.AddAsync(Entry("When does the market open?", [0, 0, 1]), CancellationToken.None);
        await WithinPollAsync(() => _index.Search("scope-f", [0, 0, 1], 4, 0.9f).Any(r => r.Id == id));

        await _other.PurgeAsync(new PurgeFilter(Id: id), CancellationToken.None);
        await WithinPollAsync(() => _index.Count == 0);
    }

    [Fact]
    public async Task A_replaced_entry_leaves_the_hot_entries_and_moves_in_the_index()
    {
        await _follower.StartWithRebuildAsync();
        var id = await _other.AddAsync(Entry("How late is the pharmacy open?", [1, 0, 0]), CancellationToken.None);
        await WithinPollAsync(() => _index.Count == 1);
        _hot.Add((await _mine.GetAsync(id, DateTimeOffset.MinValue, CancellationToken.None))!, _hot.Stamp);
        Assert.True(_hot.TryGet(id, DateTimeOffset.MinValue, out _));

        await _other.AddAsync(Entry("how late is the pharmacy open", [0, 1, 0]), CancellationToken.None);

        await WithinPollAsync(() => !_hot.TryGet(id, DateTimeOffset.MinValue, out _));
        await WithinPollAsync(() => _index.Search("scope-f", [0, 1, 0], 4, 0.9f).Any(r => r.Id == id));
        Assert.Equal(1, _index.Count);
    }

    [Fact]
    public async Task Started_from_a_sequence_over_a_loaded_index_it_applies_only_later_changes()
    {
        var before = await _other.AddAsync(Entry("Is the zoo open on Monday?", [1, 0, 0]), CancellationToken.None);
        var sequence = (await _mine.ChangesAfterAsync(0, 100, CancellationToken.None))![^1].Sequence;
        var after = await _other.AddAsync(Entry("Is the zoo open on Tuesday?", [0, 1, 0]), CancellationToken.None);

        await _follower.StartAsync(sequence);

        // What a snapshot held is not read again; the later change is applied.
        Assert.DoesNotContain(_index.Search("scope-f", [1, 0, 0], 4, 0.9f), r => r.Id == before);
        Assert.Equal([after], _index.Search("scope-f", [0, 1, 0], 4, 0.9f).Select(r => r.Id));
        Assert.True(_follower.Sequence > sequence);
    }

    [Fact]
    public async Task Applying_the_same_changes_again_changes_nothing()
    {
        var id = await _mine.AddAsync(Entry("Where can I recycle batteries?", [1, 0, 0]), CancellationToken.None);
        _index.Add("scope-f", id, [1, 0, 0]); // as SemanticCache does at once for its own store

        await _follower.StartAsync(0);
        await _follower.CatchUpAsync(CancellationToken.None);

        Assert.Equal(1, _index.Count);
        Assert.Equal([id], _index.Search("scope-f", [1, 0, 0], 4, 0.9f).Select(r => r.Id));
    }
}
