using System.Runtime.CompilerServices;
using Dapper;
using RewriteProxy.Cache;

namespace RewriteProxy.Store.Postgres;

public sealed partial class PostgresRewriteStore
{
    /// <summary>The columns of <see cref="EntryRow"/>: times as Unix milliseconds (stored to the millisecond, so exact).</summary>
    const string EntryColumns = """
        id AS Id, scope_key AS ScopeKey, partition_hash AS PartitionHash, lane AS Lane, question AS Question,
        normalized AS Normalized, content AS Content, scores::text AS Scores, response_model AS ResponseModel, model_id AS ModelId,
        prompt_tokens AS PromptTokens, completion_tokens AS CompletionTokens,
        (extract(epoch FROM created) * 1000)::bigint AS Created, (extract(epoch FROM last_hit) * 1000)::bigint AS LastHit,
        hit_count AS HitCount
        """;

    public async ValueTask<StoredEntry?> FindExactAsync(string scopeKey, string normalized, DateTimeOffset minCreated, CancellationToken cancel)
    {
        EnsureOpen();
        var row = await _connector.RunAsync("an exact lookup", c => c.QuerySingleOrDefaultAsync<EntryRow>(new CommandDefinition($"""
            SELECT {EntryColumns} FROM entries
            WHERE scope_key = @scopeKey AND normalized_hash = @hash AND normalized = @normalized AND created >= @min
            """, new
        {
            scopeKey, hash = PostgresValues.Hash(normalized), normalized = PostgresValues.Text(normalized), min = PostgresValues.Time(minCreated),
        }, cancellationToken: cancel)), cancel);
        return row?.Decode();
    }

    public async ValueTask<StoredEntry?> GetAsync(long id, DateTimeOffset minCreated, CancellationToken cancel)
    {
        EnsureOpen();
        var row = await _connector.RunAsync("reading an entry", c => c.QuerySingleOrDefaultAsync<EntryRow>(new CommandDefinition(
            $"SELECT {EntryColumns} FROM entries WHERE id = @id AND created >= @min",
            new { id, min = PostgresValues.Time(minCreated) }, cancellationToken: cancel)), cancel);
        return row?.Decode();
    }

    public async Task<IReadOnlyList<StoredEntry>> ListAsync(EntryQuery query, CancellationToken cancel)
    {
        EnsureOpen();
        var rows = await _connector.RunLongAsync("listing entries", c => c.QueryAsync<EntryRow>(new CommandDefinition($"""
            SELECT {EntryColumns} FROM entries
            WHERE (@Lane::text IS NULL OR lane = @Lane) AND (@PartitionHash::text IS NULL OR partition_hash = @PartitionHash)
              AND (@contains::text IS NULL OR strpos(normalized, @contains) > 0)
            ORDER BY last_hit DESC, id DESC LIMIT @Limit
            """, new
        {
            query.Lane, query.PartitionHash, query.Limit,
            contains = query.Contains is null ? null : PostgresValues.Text(QuestionText.Normalize(query.Contains)),
        }, commandTimeout: PostgresConnector.LongCommandSeconds, cancellationToken: cancel)), cancel);
        return rows.Select(r => r.Decode()).ToList();
    }

    const string TemplateColumns = """
        learn_key AS LearnKey, lane AS Lane, partition_hash AS PartitionHash, prefix AS Prefix, suffix AS Suffix,
        learned_from AS LearnedFrom, learned_at AS LearnedAt
        """;

    public async Task<IReadOnlyList<TemplateRow>> TemplatesAsync(DateTimeOffset minLearned, CancellationToken cancel)
    {
        EnsureOpen();
        var rows = await _connector.RunLongAsync("reading templates", c => c.QueryAsync<TemplateRecord>(new CommandDefinition(
            $"SELECT {TemplateColumns} FROM templates WHERE learned_at >= @min ORDER BY learned_at",
            new { min = PostgresValues.Time(minLearned) }, commandTimeout: PostgresConnector.LongCommandSeconds, cancellationToken: cancel)), cancel);
        return rows.Select(r => r.Decode()).ToList();
    }

    /// <summary>The tables whose size <see cref="StatsAsync"/> reports.</summary>
    const string Tables = "'entries', 'changes', 'events', 'tallies', 'templates', 'claims', 'meta', 'counters', 'schema_version'";

    public async Task<StoreStats> StatsAsync(CancellationToken cancel)
    {
        EnsureOpen();
        return await _connector.RunLongAsync("reading stats", async c =>
        {
            CommandDefinition Command(string sql) => new(sql, commandTimeout: PostgresConnector.LongCommandSeconds, cancellationToken: cancel);
            var entries = (await c.QueryAsync<(string Lane, long N)>(Command("SELECT lane, count(*) FROM entries GROUP BY lane")))
                .ToDictionary(r => r.Lane, r => r.N, StringComparer.Ordinal);
            var tallies = (await c.QueryAsync<(string Lane, string Name, long Value)>(Command("SELECT lane, name, value FROM tallies")))
                .GroupBy(r => r.Lane, StringComparer.Ordinal)
                .ToDictionary(g => g.Key, g => g.ToDictionary(r => r.Name, r => r.Value, StringComparer.Ordinal), StringComparer.Ordinal);
            var templates = (await c.QueryAsync<TemplateRecord>(Command($"SELECT {TemplateColumns} FROM templates ORDER BY lane, learned_at")))
                .Select(r => r.Decode()).ToList();
            var bytes = await c.ExecuteScalarAsync<long>(Command(
                $"SELECT coalesce(sum(pg_total_relation_size(t::regclass)), 0)::bigint FROM unnest(ARRAY[{Tables}]) AS t"));
            return new StoreStats(LaneStatsOf.Build(entries, tallies), bytes, templates);
        }, cancel);
    }

    public async IAsyncEnumerable<EventRow> EventsAsync(string? lane, DateTimeOffset since, [EnumeratorCancellation] CancellationToken cancel)
    {
        EnsureOpen();
        var rows = _connector.StreamAsync("reading events", new CommandDefinition("""
            SELECT at, lane, partition_hash, kind, question, candidate, score, verdict, reason FROM events
            WHERE (@lane::text IS NULL OR lane = @lane) AND at >= @since ORDER BY at, id
            """, new { lane, since = PostgresValues.Time(since) }, commandTimeout: PostgresConnector.LongCommandSeconds,
            flags: CommandFlags.None, cancellationToken: cancel),
            r => new EventRow(PostgresValues.Time(r.GetDateTime(0)), r.GetString(1), r.GetString(2), r.GetString(3), r.GetString(4),
                r.GetString(5), r.GetDouble(6), r.GetString(7), r.IsDBNull(8) ? null : r.GetString(8)), cancel);
        await foreach (var row in rows) yield return row;
    }

    public async IAsyncEnumerable<ScoredEvent> ScoredEventsAsync(string lane, DateTimeOffset since, [EnumeratorCancellation] CancellationToken cancel)
    {
        EnsureOpen();
        var rows = _connector.StreamAsync("reading scored events", new CommandDefinition("""
            SELECT at, kind, verdict, score, reason FROM events
            WHERE lane = @lane AND at >= @since AND kind IN ('rewrite', 'guard') ORDER BY at, id
            """, new { lane, since = PostgresValues.Time(since) }, commandTimeout: PostgresConnector.LongCommandSeconds,
            flags: CommandFlags.None, cancellationToken: cancel),
            r => new ScoredEvent(PostgresValues.Time(r.GetDateTime(0)), r.GetString(1), r.GetString(2), r.GetDouble(3),
                r.IsDBNull(4) ? null : r.GetString(4)), cancel);
        await foreach (var row in rows) yield return row;
    }

    /// <summary>A <c>templates</c> row as PostgreSQL gives it back.</summary>
    sealed record TemplateRecord(string LearnKey, string Lane, string PartitionHash, string Prefix, string Suffix, int LearnedFrom,
        DateTime LearnedAt)
    {
        public TemplateRow Decode() => new(LearnKey, Lane, PartitionHash, Prefix, Suffix, LearnedFrom, PostgresValues.Time(LearnedAt));
    }
}
