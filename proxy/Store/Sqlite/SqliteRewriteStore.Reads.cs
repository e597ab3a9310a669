using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using Dapper;
using Microsoft.Data.Sqlite;
using RewriteProxy.Cache;

namespace RewriteProxy.Store.Sqlite;

/// <summary>Reads: the hit path, the index's feed, and what operators read. Each on its own pooled connection.</summary>
public sealed partial class SqliteRewriteStore
{
    async Task<T> ReadAsync<T>(Func<SqliteConnection, Task<T>> read)
    {
        // One stat() per read: a deleted file is noticed at once, not at the next sweep.
        if (!File.Exists(FilePath))
        {
            RequestRecovery(Recovery.Gone);
            throw new StoreException($"store read failed: {FilePath} is gone");
        }
        try
        {
            await using var c = Connect(create: false);
            return await read(c);
        }
        catch (Exception e) when (e is SqliteException or InvalidOperationException)
        {
            throw ReadFailed(e);
        }
    }

    StoreException ReadFailed(Exception e)
    {
        if (e is SqliteException se && IsCorruption(se)) RequestRecovery(Recovery.Corrupt);
        return new StoreException($"store read failed: {e.Message}", e);
    }

    /// <summary>Rows of a query, one at a time on one connection, with failures turned into <see cref="StoreException"/>.</summary>
    async IAsyncEnumerable<T> StreamAsync<T>(string sql, object parameters, [EnumeratorCancellation] CancellationToken cancel)
    {
        if (!File.Exists(FilePath)) throw new StoreException($"store read failed: {FilePath} is gone");
        await using var c = Connect(create: false);
        await using var rows = c.QueryUnbufferedAsync<T>(sql, parameters).GetAsyncEnumerator(cancel);
        while (true)
        {
            try
            {
                if (!await rows.MoveNextAsync()) yield break;
            }
            catch (Exception e) when (e is SqliteException or InvalidOperationException)
            {
                throw ReadFailed(e);
            }
            yield return rows.Current;
        }
    }

    const string EntryColumns = """
        id AS Id, scope_key AS ScopeKey, partition_hash AS PartitionHash, lane AS Lane, question AS Question,
        normalized AS Normalized, content AS Content, scores AS Scores, response_model AS ResponseModel, model_id AS ModelId,
        prompt_tokens AS PromptTokens, completion_tokens AS CompletionTokens, created AS Created, last_hit AS LastHit,
        hit_count AS HitCount
        """;

    public async ValueTask<StoredEntry?> FindExactAsync(string scopeKey, string normalized, DateTimeOffset minCreated, CancellationToken cancel) =>
        await ReadAsync(async c => (await c.QuerySingleOrDefaultAsync<EntryRow>(new CommandDefinition(
            $"SELECT {EntryColumns} FROM entries WHERE scope_key = @scopeKey AND normalized = @normalized AND created >= @min",
            new { scopeKey, normalized, min = minCreated.ToUnixTimeMilliseconds() }, cancellationToken: cancel)))?.Decode());

    public async ValueTask<StoredEntry?> GetAsync(long id, DateTimeOffset minCreated, CancellationToken cancel) =>
        await ReadAsync(async c => (await c.QuerySingleOrDefaultAsync<EntryRow>(new CommandDefinition(
            $"SELECT {EntryColumns} FROM entries WHERE id = @id AND created >= @min",
            new { id, min = minCreated.ToUnixTimeMilliseconds() }, cancellationToken: cancel)))?.Decode());

    /// <summary>The rows and the newest sequence read in one transaction, so both are of one moment of the file.</summary>
    public Task<VectorLoad> ReadVectorsAsync(string modelId, CancellationToken cancel) => ReadAsync(async c =>
    {
        // Deferred: a read transaction, a snapshot of the file (an immediate one would take the write lock).
        using var tx = c.BeginTransaction(deferred: true);
        var sequence = SqliteChangeFeed.Newest(c, tx);
        var rows = new List<IndexRow>();
        await using var reader = await c.ExecuteReaderAsync(new CommandDefinition(
            "SELECT id, scope_key, vector FROM entries WHERE model_id = @modelId AND vector IS NOT NULL", new { modelId }, tx,
            cancellationToken: cancel));
        while (await reader.ReadAsync(cancel))
            rows.Add(new IndexRow(reader.GetInt64(0), reader.GetString(1), MemoryMarshal.Cast<byte, float>((byte[])reader.GetValue(2)).ToArray()));
        return new VectorLoad(rows, sequence);
    });

    public Task<IReadOnlyList<StoreChange>?> ChangesAfterAsync(long afterSequence, int limit, CancellationToken cancel) => ReadAsync(c =>
    {
        using var tx = c.BeginTransaction(deferred: true);
        return Task.FromResult(SqliteChangeFeed.After(c, tx, afterSequence, limit));
    });

    public Task<IReadOnlyList<TemplateRow>> TemplatesAsync(DateTimeOffset minLearned, CancellationToken cancel) => ReadAsync(async c =>
        (IReadOnlyList<TemplateRow>)(await c.QueryAsync<TemplateRecord>(new CommandDefinition($"""
            SELECT {TemplateColumns} FROM templates WHERE learned_at >= @min ORDER BY learned_at
            """, new { min = minLearned.ToUnixTimeMilliseconds() }, cancellationToken: cancel))).Select(r => r.Decode()).ToList());

    const string TemplateColumns = """
        learn_key AS LearnKey, lane AS Lane, partition_hash AS PartitionHash, prefix AS Prefix, suffix AS Suffix,
        learned_from AS LearnedFrom, learned_at AS LearnedAt
        """;

    sealed record TemplateRecord(string LearnKey, string Lane, string PartitionHash, string Prefix, string Suffix, long LearnedFrom, long LearnedAt)
    {
        public TemplateRow Decode() => new(LearnKey, Lane, PartitionHash, Prefix, Suffix, (int)LearnedFrom,
            DateTimeOffset.FromUnixTimeMilliseconds(LearnedAt));
    }

    public Task<StoreStats> StatsAsync(CancellationToken cancel) => ReadAsync(async c =>
    {
        var entries = (await c.QueryAsync<(string Lane, long N)>(new CommandDefinition(
                "SELECT lane, COUNT(*) FROM entries GROUP BY lane", cancellationToken: cancel)))
            .ToDictionary(r => r.Lane, r => r.N, StringComparer.Ordinal);
        var tallies = (await c.QueryAsync<(string Lane, string Name, long Value)>(new CommandDefinition(
                "SELECT lane, name, value FROM tallies", cancellationToken: cancel)))
            .GroupBy(r => r.Lane, StringComparer.Ordinal)
            .ToDictionary(g => g.Key, g => g.ToDictionary(r => r.Name, r => r.Value, StringComparer.Ordinal), StringComparer.Ordinal);
        var templates = (await c.QueryAsync<TemplateRecord>(new CommandDefinition(
                $"SELECT {TemplateColumns} FROM templates ORDER BY lane, learned_at", cancellationToken: cancel)))
            .Select(r => r.Decode()).ToList();
        long bytes = 0;
        foreach (var suffix in new[] { "", "-wal", "-shm" })
            if (File.Exists(FilePath + suffix)) bytes += new FileInfo(FilePath + suffix).Length;
        return new StoreStats(LaneStatsOf.Build(entries, tallies), bytes, templates);
    });

    public Task<IReadOnlyList<StoredEntry>> ListAsync(EntryQuery query, CancellationToken cancel) => ReadAsync(async c =>
        (IReadOnlyList<StoredEntry>)(await c.QueryAsync<EntryRow>(new CommandDefinition($"""
            SELECT {EntryColumns} FROM entries
            WHERE (@Lane IS NULL OR lane = @Lane) AND (@PartitionHash IS NULL OR partition_hash = @PartitionHash)
              AND (@contains IS NULL OR instr(normalized, @contains) > 0)
            ORDER BY last_hit DESC, id DESC LIMIT @Limit
            """, new
        {
            query.Lane, query.PartitionHash, query.Limit,
            contains = query.Contains is null ? null : QuestionText.Normalize(query.Contains),
        }, cancellationToken: cancel))).Select(r => r.Decode()).ToList());

    public async IAsyncEnumerable<EventRow> EventsAsync(string? lane, DateTimeOffset since, [EnumeratorCancellation] CancellationToken cancel)
    {
        await foreach (var r in StreamAsync<(long At, string Lane, string PartitionHash, string Kind, string Question, string Candidate, double Score,
                           string Verdict, string? Reason)>("""
                           SELECT at, lane, partition_hash, kind, question, candidate, score, verdict, reason FROM events
                           WHERE (@lane IS NULL OR lane = @lane) AND at >= @since ORDER BY at, id
                           """, new { lane, since = since.ToUnixTimeMilliseconds() }, cancel))
            yield return new EventRow(DateTimeOffset.FromUnixTimeMilliseconds(r.At), r.Lane, r.PartitionHash, r.Kind, r.Question,
                r.Candidate, r.Score, r.Verdict, r.Reason);
    }

    public async IAsyncEnumerable<ScoredEvent> ScoredEventsAsync(string lane, DateTimeOffset since, [EnumeratorCancellation] CancellationToken cancel)
    {
        await foreach (var r in StreamAsync<(long At, string Kind, string Verdict, double Score, string? Reason)>("""
                           SELECT at, kind, verdict, score, reason FROM events
                           WHERE lane = @lane AND at >= @since AND kind IN ('rewrite', 'guard') ORDER BY at, id
                           """, new { lane, since = since.ToUnixTimeMilliseconds() }, cancel))
            yield return new ScoredEvent(DateTimeOffset.FromUnixTimeMilliseconds(r.At), r.Kind, r.Verdict, r.Score, r.Reason);
    }

    public Task<long> CountMatchingAsync(PurgeFilter filter, CancellationToken cancel)
    {
        var (where, parameters) = SqlitePurgeCondition.Entries(filter, DateTimeOffset.UtcNow);
        return ReadAsync(c => c.ExecuteScalarAsync<long>(new CommandDefinition($"SELECT COUNT(*) FROM entries WHERE {where}", parameters,
            cancellationToken: cancel)));
    }

    public long EntryCount => Interlocked.Read(ref _entryCount);

    /// <summary>
    /// Closes this store's idle pooled connections (both connection strings). Only this store's pools: clearing every
    /// pool of the process would pull connections from under other stores (tests run many at once).
    /// </summary>
    public void ReleaseConnections()
    {
        using (var c = new SqliteConnection(_connectionString)) SqliteConnection.ClearPool(c);
        using (var c = new SqliteConnection(_readConnectionString)) SqliteConnection.ClearPool(c);
    }
}
