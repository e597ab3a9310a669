using Npgsql;
using Xunit.Abstractions;
using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Store.Postgres;
using RewriteProxy.Tests.Fixtures;
using static RewriteProxy.Tests.Store.PostgresStoreKit;

namespace RewriteProxy.Tests.Store;

/// <summary>The change feed every replica's index follows: vectors at a sequence, changes after it, notifications.</summary>
[Collection(PostgresCollection.Name)]
public sealed class PostgresFeedTests(PostgresCluster cluster, ITestOutputHelper output)
{
    static readonly CancellationToken None = CancellationToken.None;

    [Fact]
    public async Task Vectors_load_at_a_sequence_and_later_changes_replay_over_them()
    {
        var db = await cluster.CreateDatabaseAsync();
        await using var store = await OpenAsync(db);
        var kept = Entry("How do I apply for a fishing licence?");
        var keptId = await store.AddAsync(kept, None);
        await store.AddAsync(Entry("Exact only, no vector?", vector: null, modelId: null) with { Vector = null }, None);
        await store.AddAsync(Entry("Another model's vector?", modelId: "model-2"), None);

        var load = await store.ReadVectorsAsync("model-1", None);
        var gone = await store.PurgeAsync(new PurgeFilter(Id: keptId), None);
        var newId = await store.AddAsync(Entry("Where do I renew a passport?"), None);
        var changes = await store.ChangesAfterAsync(load.Sequence, 100, None);

        Assert.Equal(keptId, load.Rows.Single().Id);
        Assert.Equal(kept.Vector, load.Rows.Single().Vector);
        Assert.Equal(3, load.Sequence);
        Assert.NotNull(changes);
        Assert.Equal([(keptId, ChangeKind.Delete), (newId, ChangeKind.Put)], changes.Select(c => (c.EntryId, c.Kind)));
        Assert.Equal([4L, 5L], changes.Select(c => c.Sequence));
        Assert.Equal(("scope-a", "model-1"), (changes[1].ScopeKey, changes[1].ModelId));
        Assert.Equal(PostgresStoreKit.Entry("Where do I renew a passport?").Vector, changes[1].Vector);
        Assert.Equal(2, (await store.ChangesAfterAsync(0, 2, None))!.Count);
        Assert.Empty((await store.ChangesAfterAsync(5, 100, None))!);
    }

    [Fact]
    public async Task A_put_of_an_entry_deleted_since_reads_without_a_vector_and_pruned_changes_read_as_null()
    {
        var db = await cluster.CreateDatabaseAsync();
        await using var store = await OpenAsync(db);
        var id = await store.AddAsync(Entry("Can I bring a dog to the library?"), None);
        await store.PurgeAsync(new PurgeFilter(Id: id), None);

        var changes = (await store.ChangesAfterAsync(0, 10, None))!;
        Assert.Equal([ChangeKind.Put, ChangeKind.Delete], changes.Select(c => c.Kind));
        Assert.All(changes, c => Assert.Null(c.Vector));

        await ScalarAsync<long>(db, "UPDATE changes SET at = now() - interval '30 days' WHERE seq = 1 RETURNING seq");
        await store.SweepNowAsync(None);
        Assert.Null(await store.ChangesAfterAsync(0, 10, None));
        Assert.Single((await store.ChangesAfterAsync(1, 10, None))!);

        await ScalarAsync<long>(db, "UPDATE changes SET at = now() - interval '30 days' WHERE seq = 2 RETURNING seq");
        await store.SweepNowAsync(None);
        Assert.Equal(2, (await store.ReadVectorsAsync("model-1", None)).Sequence); // the pruning mark, with no change left
        Assert.Empty((await store.ChangesAfterAsync(2, 10, None))!);
        Assert.Null(await store.ChangesAfterAsync(1, 10, None));
        Assert.Null(await store.ChangesAfterAsync(99, 10, None)); // beyond anything handed out: the store was made anew
    }

    [Fact]
    public async Task Without_a_lock_a_reader_by_sequence_skips_a_change_committed_late()
    {
        // The hazard the changes lock exists for (PostgreSQL docs, "Sequence Manipulation Functions": nextval is never
        // rolled back and does not wait for other transactions, so numbers are taken in call order, not commit order).
        var db = await cluster.CreateDatabaseAsync();
        // The store's add waits on the lock for as long as this test holds it: on a loaded machine that can pass the
        // 2 s default command timeout, which would fail the add rather than show the ordering.
        await using var store = await OpenAsync(db + ";Command Timeout=30");
        await using var early = await OpenConnectionAsync(db);
        await using var late = await OpenConnectionAsync(db);
        await using var earlyTx = await early.BeginTransactionAsync();
        var first = await InsertChangeAsync(early, earlyTx);
        await using (var lateTx = await late.BeginTransactionAsync())
        {
            await InsertChangeAsync(late, lateTx);
            await lateTx.CommitAsync();
        }

        var seen = (await store.ChangesAfterAsync(0, 10, None))!.Select(c => c.Sequence).ToList();
        await earlyTx.CommitAsync();
        seen.AddRange((await store.ChangesAfterAsync(seen.Max(), 10, None))!.Select(c => c.Sequence));

        Assert.DoesNotContain(first, seen);
    }

    [Fact]
    public async Task A_writer_takes_its_sequence_only_after_an_earlier_writer_commits()
    {
        var db = await cluster.CreateDatabaseAsync();
        // The store's add waits on the lock for as long as this test holds it: on a loaded machine that can pass the
        // 2 s default command timeout, which would fail the add rather than show the ordering.
        await using var store = await OpenAsync(db + ";Command Timeout=30");
        await using var early = await OpenConnectionAsync(db);
        await using var earlyTx = await early.BeginTransactionAsync();
        await using (var lockCommand = new NpgsqlCommand($"SELECT pg_advisory_xact_lock({PostgresLocks.Changes})", early, earlyTx))
            await lockCommand.ExecuteNonQueryAsync();
        var first = await InsertChangeAsync(early, earlyTx);

        var add = store.AddAsync(Entry("Who collects garden waste?"), None);
        await Task.Delay(300);
        Assert.False(add.IsCompleted); // waits for the lock
        Assert.Empty((await store.ChangesAfterAsync(0, 10, None))!);
        await earlyTx.CommitAsync();
        await add;

        Assert.Equal([first, first + 1], (await store.ChangesAfterAsync(0, 10, None))!.Select(c => c.Sequence));
    }

    [Fact]
    public async Task Concurrent_writers_on_several_stores_never_make_a_reader_skip_a_change()
    {
        var db = await cluster.CreateDatabaseAsync();
        var options = new StoreOptions { MaxEntries = 40 }; // evictions write deletes concurrently too
        var stores = new List<PostgresRewriteStore>();
        for (var i = 0; i < 3; i++) stores.Add(await OpenAsync(db, options));
        try
        {
            using var stop = new CancellationTokenSource();
            var seen = new List<long>();
            var reader = Task.Run(async () =>
            {
                long mark = 0;
                while (!stop.IsCancellationRequested)
                {
                    var batch = (await stores[0].ChangesAfterAsync(mark, 7, None))!;
                    seen.AddRange(batch.Select(c => c.Sequence));
                    if (batch.Count > 0) mark = batch[^1].Sequence;
                }
                while ((await stores[0].ChangesAfterAsync(mark, 100, None))! is { Count: > 0 } rest)
                {
                    seen.AddRange(rest.Select(c => c.Sequence));
                    mark = rest[^1].Sequence;
                }
            });
            var writers = stores.Select((store, w) => Task.Run(async () =>
            {
                for (var i = 0; i < 60; i++)
                {
                    var id = await store.AddAsync(Entry($"Question {i % 45} from writer {w % 2}?"), None);
                    store.RecordHit(id, Now());
                    if (i % 10 == 9) await store.PurgeAsync(new PurgeFilter(Id: id - 3), None);
                }
            })).ToList();
            await Task.WhenAll(writers);
            await stop.CancelAsync();
            await reader;

            var all = await AllSequencesAsync(db);
            Assert.True(all.Count > 180, $"only {all.Count} changes were written");
            Assert.Equal(all, seen); // every committed sequence, in increasing order, none skipped
            var count = await ScalarAsync<long>(db, "SELECT count(*) FROM entries");
            Assert.InRange(count, 30, 40); // at most MaxEntries; the last purges may leave fewer
            Assert.Equal(count, await ScalarAsync<long>(db, "SELECT value FROM counters WHERE name = 'entries'"));
        }
        finally
        {
            foreach (var store in stores) await store.DisposeAsync();
        }
    }

    [Fact]
    public async Task A_commit_on_one_store_is_announced_to_another_through_its_listener()
    {
        var db = await cluster.CreateDatabaseAsync();
        await using var writer = await OpenAsync(db);
        await using var follower = await OpenAsync(db);
        Assert.True(await EventuallyAsync(() => Task.FromResult(follower.Listening), TimeSpan.FromSeconds(10)));
        var announced = new TaskCompletionSource(TaskCreationOptions.RunContinuationsAsynchronously);
        follower.ChangesAvailable += () => announced.TrySetResult();

        var clock = System.Diagnostics.Stopwatch.StartNew();
        await writer.AddAsync(Entry("When is the recycling centre open?"), None);

        await announced.Task.WaitAsync(TimeSpan.FromSeconds(2)); // the propagation bound
        output.WriteLine($"announced {clock.Elapsed.TotalMilliseconds:0.0} ms after AddAsync was called");
    }

    [Fact]
    public async Task Three_stores_opening_one_empty_database_at_once_migrate_it_once()
    {
        var db = await cluster.CreateDatabaseAsync();
        var logs = Enumerable.Range(0, 3).Select(_ => new ListLogger()).ToArray();

        var stores = await Task.WhenAll(logs.Select(log => Task.Run(() => OpenAsync(db, log: log))));
        try
        {
            Assert.Single(stores.Select(s => s.StoreId).Distinct());
            Assert.Equal(PostgresMigrations.Steps.Length, logs.Sum(l => l.Lines.Count(line => line.Contains("applied migration"))));
            Assert.Equal((long)PostgresMigrations.Steps.Length, await ScalarAsync<long>(db, "SELECT count(*) FROM schema_version"));
            Assert.Equal(1L, await ScalarAsync<long>(db, "SELECT count(*) FROM meta WHERE key = 'store_id'"));
        }
        finally
        {
            foreach (var store in stores) await store.DisposeAsync();
        }
    }

    [Fact]
    public async Task Max_entries_and_ttl_hold_with_several_writers_and_each_removal_writes_a_delete()
    {
        var db = await cluster.CreateDatabaseAsync();
        var options = new StoreOptions { MaxEntries = 10, Ttl = TimeSpan.FromHours(1) };
        await using var a = await OpenAsync(db, options);
        await using var b = await OpenAsync(db, options);
        await Task.WhenAll(
            Task.Run(async () => { for (var i = 0; i < 15; i++) await a.AddAsync(Entry($"From a, number {i}?"), None); }),
            Task.Run(async () => { for (var i = 0; i < 15; i++) await b.AddAsync(Entry($"From b, number {i}?"), None); }));
        Assert.Equal(10L, await ScalarAsync<long>(db, "SELECT count(*) FROM entries"));

        await ScalarAsync<long>(db, "UPDATE entries SET created = now() - interval '2 hours' WHERE id IN (SELECT id FROM entries LIMIT 4) RETURNING id");
        await Task.WhenAll(a.SweepNowAsync(None), b.SweepNowAsync(None)); // one sweeps, the other finds the lock taken

        Assert.Equal(6L, await ScalarAsync<long>(db, "SELECT count(*) FROM entries"));
        var deletes = (await a.ChangesAfterAsync(0, 1000, None))!.Where(c => c.Kind == ChangeKind.Delete).Select(c => c.EntryId).Distinct().Count();
        Assert.Equal(30 - 6, deletes);
    }

    static async Task<NpgsqlConnection> OpenConnectionAsync(string db)
    {
        var c = new NpgsqlConnection(db);
        await c.OpenAsync();
        return c;
    }

    static async Task<long> InsertChangeAsync(NpgsqlConnection c, NpgsqlTransaction tx)
    {
        await using var command = new NpgsqlCommand("INSERT INTO changes (entry_id, kind) VALUES (0, 'D') RETURNING seq", c, tx);
        return (long)(await command.ExecuteScalarAsync())!;
    }

    static async Task<List<long>> AllSequencesAsync(string db)
    {
        await using var c = await OpenConnectionAsync(db);
        await using var command = new NpgsqlCommand("SELECT seq FROM changes ORDER BY seq", c);
        await using var reader = await command.ExecuteReaderAsync();
        var all = new List<long>();
        while (await reader.ReadAsync()) all.Add(reader.GetInt64(0));
        return all;
    }
}
