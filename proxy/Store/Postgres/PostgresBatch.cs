using System.Collections.Concurrent;
using Dapper;
using Npgsql;

namespace RewriteProxy.Store.Postgres;

/// <summary>
/// One transaction of the background writer: hit counts, tallies, events and templates, each kind in one statement
/// over arrays (unnest), so a batch costs a handful of round trips however large it is.
/// </summary>
public sealed class PostgresBatch
{
    public required (long Id, long Count, DateTime Last)[] Hits { get; init; }
    public required ((string Lane, string Name) Key, long By)[] Tallies { get; init; }
    public required List<EventRow> Events { get; init; }
    public required List<TemplateRow> Templates { get; init; }

    public int Size => Hits.Length + Tallies.Length + Events.Count + Templates.Count;

    /// <summary>
    /// Takes every pending hit and tally out of the shared tables (producers go on adding to them) and the first
    /// <paramref name="limit"/> events and templates (the writer removes those once written). Hits and tallies are
    /// sorted so that every replica locks rows in the same order and two batches cannot deadlock.
    /// </summary>
    public static PostgresBatch Take(ConcurrentDictionary<long, (long Count, DateTime Last)> hits,
        ConcurrentDictionary<(string Lane, string Name), long> tallies, List<EventRow> events, List<TemplateRow> templates, int limit)
    {
        var takenHits = new List<(long, long, DateTime)>();
        foreach (var id in hits.Keys)
            if (hits.TryRemove(id, out var hit)) takenHits.Add((id, hit.Count, hit.Last));
        var takenTallies = new List<((string, string), long)>();
        foreach (var key in tallies.Keys)
            if (tallies.TryRemove(key, out var by) && by != 0) takenTallies.Add((key, by));
        return new PostgresBatch
        {
            Hits = [.. takenHits.OrderBy(h => h.Item1)],
            Tallies = [.. takenTallies.OrderBy(t => t.Item1.Item1, StringComparer.Ordinal).ThenBy(t => t.Item1.Item2, StringComparer.Ordinal)],
            Events = events.Take(limit).ToList(),
            Templates = templates.Take(limit).ToList(),
        };
    }

    /// <summary>Returns the hits and tallies to the shared tables after a failed write, added to what came meanwhile.</summary>
    public void PutBack(ConcurrentDictionary<long, (long Count, DateTime Last)> hits, ConcurrentDictionary<(string Lane, string Name), long> tallies)
    {
        foreach (var (id, count, last) in Hits)
            hits.AddOrUpdate(id, (count, last), (_, v) => (v.Count + count, v.Last > last ? v.Last : last));
        foreach (var (key, by) in Tallies)
            tallies.AddOrUpdate(key, by, (_, v) => v + by);
    }

    public async Task<int> WriteAsync(NpgsqlConnection c, CancellationToken cancel)
    {
        await using var tx = await c.BeginTransactionAsync(cancel);
        CommandDefinition Command(string sql, object parameters) =>
            new(sql, parameters, tx, PostgresConnector.LongCommandSeconds, cancellationToken: cancel);
        if (Hits.Length > 0)
        {
            // Hits update entries, so they take the changes lock like every writer of entries (one lock order, no deadlock).
            await PostgresEntryWrites.LockChangesAsync(c, tx, PostgresConnector.LongCommandSeconds, cancel);
            await c.ExecuteAsync(Command("""
                UPDATE entries AS e SET hit_count = e.hit_count + h.n, last_hit = greatest(e.last_hit, h.last)
                FROM unnest(@ids, @counts, @lasts) AS h (id, n, last)
                WHERE e.id = h.id
                """, new { ids = Hits.Select(h => h.Id).ToArray(), counts = Hits.Select(h => h.Count).ToArray(), lasts = Hits.Select(h => h.Last).ToArray() }));
        }
        if (Tallies.Length > 0)
            await c.ExecuteAsync(Command("""
                INSERT INTO tallies (lane, name, value)
                SELECT * FROM unnest(@lanes, @names, @values)
                ON CONFLICT (lane, name) DO UPDATE SET value = tallies.value + excluded.value
                """, new
            {
                lanes = Tallies.Select(t => PostgresValues.Text(t.Key.Lane)).ToArray(),
                names = Tallies.Select(t => PostgresValues.Text(t.Key.Name)).ToArray(),
                values = Tallies.Select(t => t.By).ToArray(),
            }));
        if (Events.Count > 0)
            await c.ExecuteAsync(Command("""
                INSERT INTO events (at, lane, partition_hash, kind, question, candidate, score, verdict, reason)
                SELECT * FROM unnest(@at, @lane, @partition, @kind, @question, @candidate, @score, @verdict, @reason)
                """, new
            {
                at = Events.Select(e => PostgresValues.Time(e.At)).ToArray(),
                lane = Events.Select(e => PostgresValues.Text(e.Lane)).ToArray(),
                partition = Events.Select(e => e.PartitionHash).ToArray(),
                kind = Events.Select(e => e.Kind).ToArray(),
                question = Events.Select(e => PostgresValues.Text(e.Question)).ToArray(),
                candidate = Events.Select(e => PostgresValues.Text(e.Candidate)).ToArray(),
                score = Events.Select(e => e.Score).ToArray(),
                verdict = Events.Select(e => e.Verdict).ToArray(),
                reason = Events.Select(e => PostgresValues.TextOrNull(e.Reason)).ToArray(),
            }));
        if (Templates.Count > 0)
            await c.ExecuteAsync(Command("""
                INSERT INTO templates (learn_key, template_hash, lane, partition_hash, prefix, suffix, learned_from, learned_at)
                SELECT * FROM unnest(@keys, @hashes, @lanes, @partitions, @prefixes, @suffixes, @froms, @ats)
                ON CONFLICT (learn_key, template_hash) DO NOTHING
                """, new
            {
                keys = Templates.Select(t => t.LearnKey).ToArray(),
                hashes = Templates.Select(t => PostgresValues.Hash(t.Prefix, t.Suffix)).ToArray(),
                lanes = Templates.Select(t => PostgresValues.Text(t.Lane)).ToArray(),
                partitions = Templates.Select(t => t.PartitionHash).ToArray(),
                prefixes = Templates.Select(t => PostgresValues.Text(t.Prefix)).ToArray(),
                suffixes = Templates.Select(t => PostgresValues.Text(t.Suffix)).ToArray(),
                froms = Templates.Select(t => t.LearnedFrom).ToArray(),
                ats = Templates.Select(t => PostgresValues.Time(t.LearnedAt)).ToArray(),
            }));
        await tx.CommitAsync(cancel);
        return Size;
    }
}
