using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Store.Postgres;
using RewriteProxy.Tests.Fixtures;
using static RewriteProxy.Tests.Store.PostgresStoreKit;

namespace RewriteProxy.Tests.Store;

/// <summary>Every member of the store contract on a real PostgreSQL server (Debian's package, started by <see cref="PostgresCluster"/>).</summary>
[Collection(PostgresCollection.Name)]
public sealed class PostgresStoreTests(PostgresCluster cluster) : IAsyncLifetime
{
    string _db = "";
    PostgresRewriteStore _store = null!;

    public async Task InitializeAsync()
    {
        _db = await cluster.CreateDatabaseAsync();
        _store = await OpenAsync(_db);
    }

    public async Task DisposeAsync() => await _store.DisposeAsync();

    static readonly CancellationToken None = CancellationToken.None;

    [Fact]
    public async Task An_entry_is_found_by_its_scope_and_question_and_by_id_as_it_was_stored()
    {
        var entry = Entry("When does the library open on Sundays?");
        var id = await _store.AddAsync(entry, None);

        var found = await _store.FindExactAsync(entry.ScopeKey, entry.Normalized, DateTimeOffset.UnixEpoch, None);
        var byId = await _store.GetAsync(id, DateTimeOffset.UnixEpoch, None);

        Assert.NotNull(found);
        Assert.Equal(found, byId! with { Scores = found.Scores });
        Assert.Equal((id, entry.Question, entry.Content, entry.Lane, entry.PartitionHash, entry.ModelId, entry.ResponseModel),
            (found.Id, found.Question, found.Content, found.Lane, found.PartitionHash, found.ModelId, found.ResponseModel));
        Assert.Equal((entry.Scores.MaxDrift, entry.Scores.Dropped), (found.Scores.MaxDrift, found.Scores.Dropped));
        Assert.Equal(entry.Scores.Drifts, found.Scores.Drifts);
        Assert.Equal((entry.Created, entry.Created, 0L, 11L, 22L), (found.Created, found.LastHit, found.HitCount, found.PromptTokens, found.CompletionTokens));
        Assert.Null(await _store.FindExactAsync("another-scope", entry.Normalized, DateTimeOffset.UnixEpoch, None));
        Assert.Null(await _store.FindExactAsync(entry.ScopeKey, entry.Normalized, entry.Created.AddMilliseconds(1), None));
        Assert.Null(await _store.GetAsync(id, entry.Created.AddMilliseconds(1), None));
    }

    [Fact]
    public async Task Storing_the_same_scope_and_question_again_replaces_the_entry_and_keeps_its_id()
    {
        var first = await _store.AddAsync(Entry("How do I renew a parking permit?", content: "old"), None);
        var second = await _store.AddAsync(Entry("How do I renew a parking permit?", content: "new"), None);

        Assert.Equal(first, second);
        Assert.Equal("new", (await _store.GetAsync(first, DateTimeOffset.UnixEpoch, None))!.Content);
        Assert.Equal(1, (await _store.StatsAsync(None)).Lanes.Single().Entries);
    }

    [Fact]
    public async Task Questions_longer_than_a_btree_entry_and_with_nul_characters_are_stored_and_found()
    {
        // A B-tree entry holds at most about a third of an 8 kB page (PostgreSQL docs, "B-Tree" limits); an unlocated
        // call's whole message is its key. JSON may carry U+0000, which PostgreSQL text refuses (docs, "Character Types").
        var longQuestion = string.Join(' ', Enumerable.Range(0, 4000).Select(i => $"word{i}"));
        var nul = "What does \u0000 mean here?";
        await _store.AddAsync(Entry(longQuestion), None);
        await _store.AddAsync(Entry(nul), None);

        Assert.NotNull(await _store.FindExactAsync("scope-a", QuestionText.Normalize(longQuestion), DateTimeOffset.UnixEpoch, None));
        Assert.NotNull(await _store.FindExactAsync("scope-a", QuestionText.Normalize(nul), DateTimeOffset.UnixEpoch, None));
    }

    [Fact]
    public async Task Hits_tallies_events_and_templates_are_written_in_the_background_and_read_back()
    {
        var id = await _store.AddAsync(Entry("Where do I pay a library fine?"), None);
        var at = Now().AddSeconds(5);
        _store.RecordHit(id, at);
        _store.RecordHit(id, at.AddSeconds(-1));
        _store.Count("draft", Tally.Lookup("hit_exact"), 2);
        _store.Count("draft", Tally.Dropped("drift"));
        _store.Count("draft", Tally.Question("marker"), 3);
        _store.AppendEvent(new EventRow(at, "draft", "partition-1", "rewrite", "Where do I pay a fine?", "At the desk.", 0.2, "accepted", null));
        _store.AppendEvent(new EventRow(at, "draft", "partition-1", "guard", "Fines in 2024?", "Fines in 2023?", 0.93, "refused", "number"));
        var template = new TemplateRow("key-1", "draft", "partition-1", "Write a passage that answers: ", "\nPassage:", 3, at);
        _store.SaveTemplate(template);
        _store.SaveTemplate(template with { LearnedFrom = 9 }); // the same key, prefix and suffix: kept once
        await _store.FlushAsync(None);

        var entry = (await _store.GetAsync(id, DateTimeOffset.UnixEpoch, None))!;
        Assert.Equal((2L, at), (entry.HitCount, entry.LastHit));
        var lane = (await _store.StatsAsync(None)).Lanes.Single();
        Assert.Equal((1L, 2L), (lane.Entries, lane.HitExact));
        Assert.Equal(1, lane.DropsByReason["drift"]);
        Assert.Equal(3, lane.Questions["marker"]);
        var events = await _store.EventsAsync("draft", at.AddSeconds(-1), None).ToListAsync();
        Assert.Equal(["accepted", "refused"], events.Select(e => e.Verdict));
        Assert.Equal(events[1], new EventRow(at, "draft", "partition-1", "guard", "Fines in 2024?", "Fines in 2023?", 0.93, "refused", "number"));
        var scored = await _store.ScoredEventsAsync("draft", at.AddSeconds(-1), None).ToListAsync();
        Assert.Equal(new ScoredEvent(at, "guard", "refused", 0.93, "number"), scored[1]);
        Assert.Empty(await _store.EventsAsync("other-lane", DateTimeOffset.UnixEpoch, None).ToListAsync());
        Assert.Equal([template], await _store.TemplatesAsync(at.AddSeconds(-1), None));
        Assert.Empty(await _store.TemplatesAsync(at.AddSeconds(1), None));
    }

    [Fact]
    public async Task Events_are_not_written_when_the_event_log_is_off()
    {
        await using var store = await OpenAsync(await cluster.CreateDatabaseAsync(), events: new EventsOptions { Enabled = false });
        store.AppendEvent(new EventRow(Now(), "draft", "p", "rewrite", "q", "c", 0.1, "accepted", null));
        await store.FlushAsync(None);
        Assert.Empty(await store.EventsAsync(null, DateTimeOffset.UnixEpoch, None).ToListAsync());
    }

    [Fact]
    public async Task Listing_filters_by_lane_partition_and_text_most_recently_hit_first()
    {
        var a = await _store.AddAsync(Entry("How late is the pool open?", lane: "draft"), None);
        var b = await _store.AddAsync(Entry("Is the pool open on holidays?", lane: "draft", partition: "partition-2"), None);
        await _store.AddAsync(Entry("Where is the town hall?", lane: "siblings"), None);
        _store.RecordHit(a, Now().AddMinutes(1));
        await _store.FlushAsync(None);

        Assert.Equal([a, b], (await _store.ListAsync(new EntryQuery(Lane: "draft"), None)).Select(e => e.Id));
        Assert.Equal([b], (await _store.ListAsync(new EntryQuery(PartitionHash: "partition-2"), None)).Select(e => e.Id));
        Assert.Equal([a, b], (await _store.ListAsync(new EntryQuery(Contains: "The POOL"), None)).Select(e => e.Id));
        Assert.Single(await _store.ListAsync(new EntryQuery(Limit: 1), None));
        Assert.Equal(3, (await _store.ListAsync(new EntryQuery(), None)).Count);
    }

    [Fact]
    public async Task Purge_deletes_what_its_filter_matches_and_counting_agrees_beforehand()
    {
        var old = await _store.AddAsync(Entry("Old question about bins?", created: Now().AddDays(-2)), None);
        var other = await _store.AddAsync(Entry("A question of another tenant?", partition: "partition-2"), None);
        var kept = await _store.AddAsync(Entry("A question in another lane?", lane: "siblings"), None);
        _store.SaveTemplate(new TemplateRow("k", "draft", "partition-2", "Q: ", "", 2, Now()));
        await _store.FlushAsync(None);

        await Assert.ThrowsAsync<ArgumentException>(() => _store.PurgeAsync(new PurgeFilter(), None));
        Assert.Equal(1, await _store.CountMatchingAsync(new PurgeFilter(OlderThan: TimeSpan.FromDays(1)), None));
        Assert.Equal([old], await _store.PurgeAsync(new PurgeFilter(OlderThan: TimeSpan.FromDays(1)), None));
        Assert.Equal(1, await _store.CountMatchingAsync(new PurgeFilter(PartitionHash: "partition-2"), None));
        Assert.Equal([other], await _store.PurgeAsync(new PurgeFilter(Lane: "draft", PartitionHash: "partition-2"), None));
        Assert.Empty(await _store.TemplatesAsync(DateTimeOffset.UnixEpoch, None)); // the purged partition's template went with it
        Assert.Equal([kept], await _store.PurgeAsync(new PurgeFilter(Id: kept), None));
        Assert.Equal(0, await _store.CountMatchingAsync(new PurgeFilter(Lane: "siblings"), None));
    }

    [Fact]
    public async Task Stats_report_entries_and_tallies_per_lane_and_the_tables_size()
    {
        await _store.AddAsync(Entry("How do I register a bike?"), None);
        _store.Count("siblings", Tally.Lookup("miss"), 4);
        _store.Count("siblings", Tally.TokensSaved, 120);
        await _store.FlushAsync(None);

        var stats = await _store.StatsAsync(None);

        Assert.Equal(["draft", "siblings"], stats.Lanes.Select(l => l.Lane));
        Assert.Equal((4L, 120L), (stats.Lanes[1].Miss, stats.Lanes[1].TokensSaved));
        var tables = await ScalarAsync<long>(_db, """
            SELECT sum(pg_total_relation_size(c.oid))::bigint FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
            WHERE n.nspname = 'public' AND c.relkind = 'r'
            """);
        Assert.Equal(tables, stats.Bytes);
    }

    [Fact]
    public async Task Location_names_user_host_port_and_database_never_the_password()
    {
        var builder = new Npgsql.NpgsqlConnectionStringBuilder(_db);
        Assert.Equal($"postgres {PostgresCluster.Role}@127.0.0.1:{cluster.Port}/{builder.Database}", _store.Location);
        Assert.DoesNotContain(cluster.Password, _store.Location);
    }

    [Fact]
    public async Task Read_only_open_needs_an_existing_schema_and_creates_nothing()
    {
        var empty = await cluster.CreateDatabaseAsync();
        var missing = await Assert.ThrowsAsync<StoreException>(() => OpenAsync(empty, access: StoreAccess.ReadOnly));
        Assert.Contains("no RewriteProxy store", missing.Message);
        Assert.Equal(0L, await ScalarAsync<long>(empty, "SELECT count(*) FROM pg_tables WHERE schemaname = 'public'"));

        await using var reader = await OpenAsync(_db, access: StoreAccess.ReadOnly);
        Assert.Equal(_store.StoreId, reader.StoreId);
        await Assert.ThrowsAsync<StoreException>(() => reader.AddAsync(Entry("Can a reader write?"), None));
        reader.RecordHit(1, Now()); // dropped, never thrown
        reader.AppendEvent(new EventRow(Now(), "draft", "p", "rewrite", "q", "c", 0.1, "accepted", null));
        Assert.Empty(await reader.ListAsync(new EntryQuery(), None));
    }

    [Fact]
    public async Task A_schema_newer_than_the_proxy_is_refused()
    {
        await ScalarAsync<int>(_db, $"INSERT INTO schema_version (version) VALUES ({PostgresMigrations.Steps.Length + 1}) RETURNING version");

        var e = await Assert.ThrowsAsync<StoreException>(() => OpenAsync(_db));
        Assert.Contains("newer", e.Message);
        await Assert.ThrowsAsync<StoreException>(() => OpenAsync(_db, access: StoreAccess.ReadOnly));
    }
}
