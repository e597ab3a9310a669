using Dapper;
using Npgsql;

namespace RewriteProxy.Store.Postgres;

/// <summary>
/// Every write of entries, and so of the change feed: each runs in a transaction that first takes
/// <see cref="PostgresLocks.Changes"/> (<see cref="LockChangesAsync"/>), writes one change row per entry stored or
/// deleted, keeps the <c>entries</c> counter, and notifies the other replicas when it commits.
/// </summary>
public static class PostgresEntryWrites
{
    /// <summary>The channel of LISTEN/NOTIFY: a notification on it means "there may be new changes, or a released claim".</summary>
    public const string Channel = "rewriteproxy_changes";

    /// <summary>Queues the notification; PostgreSQL delivers it when (and only if) the transaction commits.</summary>
    public const string Notify = $"SELECT pg_notify('{Channel}', '')";

    const string Lock = "SELECT 1 FROM pg_advisory_xact_lock(@lockKey)";

    /// <summary>
    /// Deletes the entries matching <paramref name="condition"/> with a delete change for each and the counter kept;
    /// returns their ids. One statement: the data-modifying CTEs share one snapshot.
    /// </summary>
    static string DeleteEntries(string condition) => $"""
        WITH gone AS (DELETE FROM entries WHERE {condition} RETURNING id),
             deleted AS (INSERT INTO changes (entry_id, kind) SELECT id, 'D' FROM gone ORDER BY id),
             counted AS (UPDATE counters SET value = value - (SELECT count(*) FROM gone) WHERE name = 'entries')
        SELECT id FROM gone
        """;

    /// <summary>The least recently hit entries beyond <c>@maxEntries</c>, by the counter (never a count of the table).</summary>
    static readonly string Evict = DeleteEntries("""
        id IN (SELECT id FROM entries ORDER BY last_hit, id
               LIMIT (SELECT greatest(value - @maxEntries, 0) FROM counters WHERE name = 'entries'))
        """);

    /// <summary>
    /// Which entries a purge deletes (and <see cref="IRewriteStore.CountMatchingAsync"/> counts): written once. The
    /// casts type the parameters that may be null, which PostgreSQL cannot infer from <c>IS NULL</c>.
    /// </summary>
    public const string PurgeCondition = """
        (@Lane::text IS NULL OR lane = @Lane) AND (@PartitionHash::text IS NULL OR partition_hash = @PartitionHash)
        AND (@before::timestamptz IS NULL OR created < @before) AND (@Id::bigint IS NULL OR id = @Id)
        """;

    /// <summary>The templates of a purged lane or partition (not of a purge by id), learned before the age limit.</summary>
    const string PurgeTemplates = """
        DELETE FROM templates
        WHERE @Id::bigint IS NULL AND (@Lane::text IS NULL OR lane = @Lane) AND (@PartitionHash::text IS NULL OR partition_hash = @PartitionHash)
          AND (@before::timestamptz IS NULL OR learned_at < @before)
        """;

    const string Upsert = """
        WITH up AS (
            INSERT INTO entries (scope_key, normalized_hash, partition_hash, lane, question, normalized, vector, model_id, content,
                                 scores, response_model, prompt_tokens, completion_tokens, created, last_hit, hit_count)
            VALUES (@ScopeKey, @hash, @PartitionHash, @Lane, @question, @normalized, @vector, @ModelId, @content,
                    @scores::jsonb, @responseModel, @PromptTokens, @CompletionTokens, @created, @created, 0)
            ON CONFLICT (scope_key, normalized_hash) DO UPDATE SET
                question = excluded.question, normalized = excluded.normalized, vector = excluded.vector,
                model_id = excluded.model_id, content = excluded.content, scores = excluded.scores,
                response_model = excluded.response_model, prompt_tokens = excluded.prompt_tokens,
                completion_tokens = excluded.completion_tokens, created = excluded.created, last_hit = excluded.last_hit,
                hit_count = 0
            RETURNING id, (xmax = 0) AS inserted),
        put AS (INSERT INTO changes (entry_id, kind) SELECT id, 'P' FROM up),
        counted AS (UPDATE counters SET value = value + 1 WHERE name = 'entries' AND (SELECT inserted FROM up))
        SELECT id FROM up
        """;

    /// <summary>The purge parameters: the filter's fields, its age as a time.</summary>
    public static object PurgeParameters(PurgeFilter f) => new
    {
        f.Lane, f.PartitionHash, f.Id,
        before = f.OlderThan is { } age ? PostgresValues.Time(DateTimeOffset.UtcNow - age) : (DateTime?)null,
    };

    public static Task LockChangesAsync(NpgsqlConnection c, NpgsqlTransaction tx, int timeout, CancellationToken cancel) =>
        c.ExecuteAsync(new CommandDefinition(Lock, new { lockKey = PostgresLocks.Changes }, tx, timeout, cancellationToken: cancel));

    /// <summary>Stores an entry (replacing the one of its scope and question, which keeps its id), evicts beyond the limit, notifies; one round trip.</summary>
    public static async Task<long> AddAsync(NpgsqlConnection c, NpgsqlTransaction tx, NewEntry e, long maxEntries, CancellationToken cancel)
    {
        var created = PostgresValues.Time(e.Created);
        using var grid = await c.QueryMultipleAsync(new CommandDefinition($"{Lock};\n{Upsert};\n{Evict};\n{Notify}", new
        {
            lockKey = PostgresLocks.Changes,
            e.ScopeKey, hash = PostgresValues.Hash(e.Normalized), e.PartitionHash, e.Lane,
            question = PostgresValues.Text(e.Question), normalized = PostgresValues.Text(e.Normalized),
            vector = e.Vector is null ? null : PostgresValues.Vector(e.Vector), e.ModelId, content = PostgresValues.Text(e.Content),
            scores = PostgresValues.Scores(e.Scores), responseModel = PostgresValues.TextOrNull(e.ResponseModel),
            e.PromptTokens, e.CompletionTokens, created, maxEntries,
        }, tx, cancellationToken: cancel));
        await grid.ReadAsync<int>();
        var id = await grid.ReadSingleAsync<long>();
        await grid.ReadAsync<long>();
        await grid.ReadAsync<object>();
        return id;
    }

    /// <summary>Deletes what the filter matches (and the templates of a purged lane or partition), notifies; returns the entries' ids.</summary>
    public static async Task<IReadOnlyList<long>> PurgeAsync(NpgsqlConnection c, NpgsqlTransaction tx, PurgeFilter f, CancellationToken cancel)
    {
        await LockChangesAsync(c, tx, PostgresConnector.LongCommandSeconds, cancel);
        await c.ExecuteAsync(new CommandDefinition(PurgeTemplates, PurgeParameters(f), tx, PostgresConnector.LongCommandSeconds,
            cancellationToken: cancel));
        var ids = (await c.QueryAsync<long>(new CommandDefinition(DeleteEntries(PurgeCondition), PurgeParameters(f), tx,
            PostgresConnector.LongCommandSeconds, cancellationToken: cancel))).AsList();
        if (ids.Count > 0) await c.ExecuteAsync(new CommandDefinition(Notify, null, tx, cancellationToken: cancel));
        return ids;
    }

    /// <summary>
    /// Deletes up to <paramref name="chunk"/> entries created before <paramref name="before"/>, with their changes, and
    /// notifies; the caller holds the changes lock in <paramref name="tx"/>. Returns how many went.
    /// </summary>
    public static async Task<int> ExpireAsync(NpgsqlConnection c, NpgsqlTransaction tx, DateTimeOffset before, int chunk, CancellationToken cancel)
    {
        var ids = (await c.QueryAsync<long>(new CommandDefinition(
            DeleteEntries("id IN (SELECT id FROM entries WHERE created < @before ORDER BY created LIMIT @chunk)"),
            new { before = PostgresValues.Time(before), chunk }, tx, PostgresConnector.LongCommandSeconds, cancellationToken: cancel))).AsList();
        if (ids.Count > 0) await c.ExecuteAsync(new CommandDefinition(Notify, null, tx, cancellationToken: cancel));
        return ids.Count;
    }

    /// <summary>
    /// Sets the <c>entries</c> counter to the table's count (it can only drift through writes outside the store) and
    /// evicts beyond the limit; the caller holds the changes lock. Returns how many were evicted.
    /// </summary>
    public static async Task<int> RecountAndEvictAsync(NpgsqlConnection c, NpgsqlTransaction tx, long maxEntries, CancellationToken cancel)
    {
        await c.ExecuteAsync(new CommandDefinition(
            "UPDATE counters SET value = (SELECT count(*) FROM entries) WHERE name = 'entries'", null, tx,
            PostgresConnector.LongCommandSeconds, cancellationToken: cancel));
        var ids = (await c.QueryAsync<long>(new CommandDefinition(Evict, new { maxEntries }, tx, PostgresConnector.LongCommandSeconds,
            cancellationToken: cancel))).AsList();
        if (ids.Count > 0) await c.ExecuteAsync(new CommandDefinition(Notify, null, tx, cancellationToken: cancel));
        return ids.Count;
    }
}
