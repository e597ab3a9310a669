using RewriteProxy.Cache;
using RewriteProxy.Store;

namespace RewriteProxy.Tests.Store;

/// <summary>What operators read (stats, listings, events, templates) and the one purge condition.</summary>
public abstract partial class StoreContract
{
    /// <summary>Two lanes × two partitions × fresh or ten days old: every purge filter field splits it.</summary>
    static readonly (string Lane, string Partition, bool Old, string Question)[] Grid =
    [
        .. from lane in new[] { "draft", "siblings" }
           from partition in new[] { "p-one", "p-two" }
           from old in new[] { false, true }
           select (lane, partition, old, $"{lane} {partition} {(old ? "old" : "fresh")}?"),
    ];

    static TemplateRow Template(string lane, string partition, DateTimeOffset at, string prefix = "Rewrite: ") =>
        new($"key-{lane}-{partition}", lane, partition, prefix, "", 3, at);

    async Task<(IRewriteStore Store, List<(long Id, string Lane, string Partition, bool Old)> Rows)> GridStoreAsync()
    {
        // A TTL far beyond the rows' ages, so that no sweep expires one during the test.
        var store = await OpenAsync(NewPlace() with { Ttl = TimeSpan.FromDays(3650) });
        var rows = new List<(long, string, string, bool)>();
        foreach (var (lane, partition, old, question) in Grid)
        {
            var created = DateTimeOffset.UtcNow - (old ? TimeSpan.FromDays(10) : TimeSpan.FromMinutes(1));
            rows.Add((await store.AddAsync(Entry(question, lane, partition, created: created), None), lane, partition, old));
            store.SaveTemplate(Template(lane, partition, created, prefix: $"Rewrite ({question}): "));
        }
        await store.FlushAsync(None);
        return (store, rows);
    }

    /// <summary>Every non-empty combination of lane, partition, age and id.</summary>
    public static TheoryData<int> FilterShapes() => [.. Enumerable.Range(1, 15)];

    [Theory]
    [MemberData(nameof(FilterShapes))]
    public async Task Purge_deletes_exactly_what_count_matching_counts(int shape)
    {
        var (store, rows) = await GridStoreAsync();
        var target = rows[5];
        var filter = new PurgeFilter(
            Lane: (shape & 1) != 0 ? target.Lane : null,
            PartitionHash: (shape & 2) != 0 ? target.Partition : null,
            OlderThan: (shape & 4) != 0 ? TimeSpan.FromDays(7) : null,
            Id: (shape & 8) != 0 ? target.Id : null);
        var expected = rows.Where(r => (filter.Lane is null || r.Lane == filter.Lane)
                                       && (filter.PartitionHash is null || r.Partition == filter.PartitionHash)
                                       && (filter.OlderThan is null || r.Old)
                                       && (filter.Id is null || r.Id == filter.Id)).Select(r => r.Id).Order().ToList();

        var counted = await store.CountMatchingAsync(filter, None);
        var deleted = await store.PurgeAsync(filter, None);

        Assert.Equal(expected.Count, counted);
        Assert.Equal(expected, deleted.Order());
        Assert.Equal(rows.Count - expected.Count, (await store.ListAsync(new EntryQuery(Limit: 100), None)).Count);
        Assert.Equal(0, await store.CountMatchingAsync(filter, None));
        // Templates go with a purge of their lane or partition (by age too), never with a purge of one entry by id.
        var templates = await store.TemplatesAsync(DateTimeOffset.MinValue, None);
        var templatesGone = filter.Id is null ? expected.Count : 0;
        Assert.Equal(Grid.Length - templatesGone, templates.Count);
    }

    [Fact]
    public async Task An_empty_purge_filter_is_refused()
    {
        var store = await OpenAsync();

        await Assert.ThrowsAsync<ArgumentException>(() => store.PurgeAsync(new PurgeFilter(), None));
        await Assert.ThrowsAsync<ArgumentException>(() => store.CountMatchingAsync(new PurgeFilter(), None));
    }

    [Fact]
    public async Task Stats_give_entries_tallies_templates_and_a_size_per_lane()
    {
        var (store, _) = await GridStoreAsync();
        store.Count("draft", Tally.Lookup("hit_exact"), 5);
        store.Count("draft", Tally.Lookup("hit_semantic"), 3);
        store.Count("draft", Tally.Lookup("miss"), 2);
        store.Count("draft", Tally.Lookup("bypass"));
        store.Count("draft", Tally.TokensSaved, 400);
        store.Count("draft", Tally.Dropped("drift"), 2);
        store.Count("draft", Tally.Refused("number"));
        store.Count("draft", Tally.Question("marker"), 7);
        await store.FlushAsync(None);

        var stats = await store.StatsAsync(None);

        var draft = stats.Lanes.Single(l => l.Lane == "draft");
        Assert.Equal((4L, 5L, 3L, 2L, 1L, 400L), (draft.Entries, draft.HitExact, draft.HitSemantic, draft.Miss, draft.Bypass, draft.TokensSaved));
        Assert.Equal(0.8, draft.HitRatio);
        Assert.Equal(2, draft.DropsByReason["drift"]);
        Assert.Equal(1, draft.RefusalsByReason["number"]);
        Assert.Equal(7, draft.Questions["marker"]);
        Assert.Equal(4, stats.Lanes.Single(l => l.Lane == "siblings").Entries);
        Assert.Equal(Grid.Length, stats.Templates.Count);
        Assert.True(stats.Bytes > 0);
    }

    [Fact]
    public async Task Listings_filter_by_lane_partition_and_text_and_stop_at_the_limit()
    {
        var (store, _) = await GridStoreAsync();

        Assert.Equal(4, (await store.ListAsync(new EntryQuery(Lane: "draft"), None)).Count);
        Assert.Equal(2, (await store.ListAsync(new EntryQuery(Lane: "draft", PartitionHash: "p-two"), None)).Count);
        var found = Assert.Single(await store.ListAsync(new EntryQuery(Contains: "SIBLINGS p-one OLD"), None));
        Assert.Equal("siblings p-one old?", found.Question);
        Assert.Equal(3, (await store.ListAsync(new EntryQuery(Limit: 3), None)).Count);
    }

    [Fact]
    public async Task Events_are_read_by_lane_and_time_oldest_first_and_scored_events_carry_the_scores()
    {
        var store = await OpenAsync();
        var t0 = DateTimeOffset.UtcNow - TimeSpan.FromMinutes(10);
        store.AppendEvent(new EventRow(t0, "draft", "p", "rewrite", "q1", "r1", 0.2, "accepted", null));
        store.AppendEvent(new EventRow(t0.AddMinutes(1), "draft", "p", "guard", "q2", "c2", 0.9, "refused", "number"));
        store.AppendEvent(new EventRow(t0.AddMinutes(2), "siblings", "p", "rewrite", "q3", "r3", 0.7, "dropped", "drift"));
        store.AppendEvent(new EventRow(t0.AddMinutes(3), "draft", "p", "other", "q4", "r4", 0.1, "accepted", null));
        await store.FlushAsync(None);

        var all = await store.EventsAsync(null, t0, None).ToListAsync();
        var draftLater = await store.EventsAsync("draft", t0.AddSeconds(30), None).ToListAsync();
        var scored = await store.ScoredEventsAsync("draft", t0, None).ToListAsync();

        Assert.Equal(["q1", "q2", "q3", "q4"], all.Select(e => e.Question));
        Assert.Equal(["q2", "q4"], draftLater.Select(e => e.Question));
        Assert.Equal([("rewrite", "accepted", 0.2, (string?)null), ("guard", "refused", 0.9, "number")],
            scored.Select(e => (e.Kind, e.Verdict, e.Score, e.Reason)));
        Assert.Equal(t0.ToUnixTimeMilliseconds(), scored[0].At.ToUnixTimeMilliseconds());
    }

    [Fact]
    public async Task A_template_is_kept_once_and_read_back_by_age()
    {
        var store = await OpenAsync();
        var now = DateTimeOffset.UtcNow;
        store.SaveTemplate(Template("draft", "p-one", now));
        store.SaveTemplate(Template("draft", "p-one", now.AddSeconds(1)));
        store.SaveTemplate(Template("draft", "p-two", now - TimeSpan.FromDays(2)));
        await store.FlushAsync(None);

        var young = await store.TemplatesAsync(now - TimeSpan.FromDays(1), None);

        var kept = Assert.Single(young);
        Assert.Equal(("key-draft-p-one", "draft", "p-one", "Rewrite: ", "", 3), (kept.LearnKey, kept.Lane, kept.PartitionHash, kept.Prefix, kept.Suffix, kept.LearnedFrom));
        Assert.Equal(2, (await store.TemplatesAsync(DateTimeOffset.MinValue, None)).Count);
    }

    [Fact]
    public async Task Flush_waits_for_queued_background_writes()
    {
        var store = await OpenAsync();
        for (var i = 0; i < 200; i++)
            store.AppendEvent(new EventRow(DateTimeOffset.UtcNow, "draft", "p", "rewrite", $"q{i}", "r", 0.1, "accepted", null));

        await store.FlushAsync(None);

        Assert.Equal(200, (await store.EventsAsync("draft", DateTimeOffset.MinValue, None).ToListAsync()).Count);
    }
}
