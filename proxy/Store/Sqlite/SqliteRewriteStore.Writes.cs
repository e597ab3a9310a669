using System.Runtime.InteropServices;
using System.Text.Json;
using Dapper;
using Microsoft.Data.Sqlite;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Store.Sqlite;

/// <summary>
/// The writer: one background loop that commits queued operations in batches, and every so often sweeps (expiry,
/// event retention, change pruning). Every entry it stores or deletes is recorded in <c>changes</c> in the same
/// transaction, and <see cref="ChangesAvailable"/> is raised after the commit.
/// </summary>
public sealed partial class SqliteRewriteStore
{
    /// <summary>Most operations in one transaction: large enough to amortise the commit, small enough to keep it short.</summary>
    const int BatchSize = 512;
    /// <summary>How often expiry and retention run, and the file is checked to still be there.</summary>
    static readonly TimeSpan SweepEvery = TimeSpan.FromSeconds(30);

    DateTimeOffset _nextSweep;

    /// <summary>Runs a sweep now and waits for it (tests: expiry, and pruning changes with the limits given).</summary>
    internal async Task SweepNowAsync(TimeSpan? keepChangesFor = null, long? maxChangesKept = null)
    {
        var op = new WriteOp.Sweep(keepChangesFor ?? SqliteChangeFeed.KeepFor, maxChangesKept ?? SqliteChangeFeed.MaxKept);
        await EnqueueAsync(op, CancellationToken.None);
        await op.Result.Task;
    }

    async Task WriteLoopAsync()
    {
        var reader = _queue.Reader;
        var batch = new List<WriteOp>(BatchSize);
        _nextSweep = DateTimeOffset.UtcNow + SweepEvery;
        while (true)
        {
            bool more;
            try
            {
                using var tick = new CancellationTokenSource(SweepEvery);
                more = await reader.WaitToReadAsync(tick.Token);
            }
            catch (OperationCanceledException)
            {
                more = true; // nothing arrived: time to sweep
            }
            if (!more && !reader.TryPeek(out _)) break;
            RecoverIfAsked();
            batch.Clear();
            while (batch.Count < BatchSize && reader.TryRead(out var op)) batch.Add(op);
            if (batch.Count > 0) WriteBatch(batch);
            RecoverIfAsked();
            var asked = batch.OfType<WriteOp.Sweep>().LastOrDefault();
            if (asked is not null || DateTimeOffset.UtcNow >= _nextSweep)
            {
                _nextSweep = DateTimeOffset.UtcNow + SweepEvery;
                Sweep(asked?.KeepChangesFor ?? SqliteChangeFeed.KeepFor, asked?.MaxChangesKept ?? SqliteChangeFeed.MaxKept);
                foreach (var sweep in batch.OfType<WriteOp.Sweep>()) sweep.Complete();
            }
        }
    }

    void WriteBatch(List<WriteOp> batch)
    {
        var changed = false;
        try
        {
            using var c = Connect();
            using var tx = c.BeginTransaction();
            var now = DateTimeOffset.UtcNow;
            foreach (var op in batch)
            {
                switch (op)
                {
                    case WriteOp.Insert insert:
                        insert.Id = InsertEntry(c, tx, insert.Entry, now);
                        changed = true;
                        break;
                    case WriteOp.Event ev:
                        InsertEvent(c, tx, ev.Row);
                        _eventCount++;
                        break;
                    case WriteOp.Template template:
                        InsertTemplate(c, tx, template.Row);
                        break;
                    case WriteOp.Purge purge:
                        purge.Ids = Purge(c, tx, purge.Filter, now);
                        changed |= purge.Ids.Count > 0;
                        break;
                }
            }
            WritePending(c, tx);
            changed |= EvictOverflow(c, tx, now) > 0;
            if (_eventCount > _events.MaxRows)
            {
                var excess = _eventCount - _events.MaxRows;
                _eventCount -= c.Execute("DELETE FROM events WHERE id IN (SELECT id FROM events ORDER BY id LIMIT @excess)", new { excess }, tx);
            }
            tx.Commit();
        }
        catch (Exception e) when (e is SqliteException or InvalidOperationException or IOException)
        {
            if (e is SqliteException se && IsCorruption(se)) RequestRecovery(Recovery.Corrupt);
            else if (!File.Exists(FilePath)) RequestRecovery(Recovery.Gone);
            var failure = new StoreException($"store write failed: {e.Message}", e);
            foreach (var op in batch.Where(op => op is not WriteOp.Sweep)) op.Fail(failure);
            _log.LogError("store: a batch of {Count} writes failed: {Reason}", batch.Count, e.Message);
            RecountAfterFailure();
            return;
        }
        // A sweep asked for completes after the sweep itself.
        foreach (var op in batch.Where(op => op is not WriteOp.Sweep)) op.Complete();
        if (changed) RaiseChangesAvailable();
    }

    void RaiseChangesAvailable()
    {
        try
        {
            ChangesAvailable?.Invoke();
        }
        catch (Exception e)
        {
            // A follower's failure must not stop the writer; followers also poll.
            _log.LogError("store: a ChangesAvailable handler failed: {Reason}", e.Message);
        }
    }

    void WritePending(SqliteConnection c, SqliteTransaction tx)
    {
        Volatile.Write(ref _pendingWake, 0);
        foreach (var id in _hits.Keys)
        {
            if (!_hits.TryRemove(id, out var hit)) continue;
            c.Execute("UPDATE entries SET hit_count = hit_count + @Count, last_hit = MAX(last_hit, @Last) WHERE id = @id",
                new { id, hit.Count, hit.Last }, tx);
        }
        foreach (var key in _tallies.Keys)
        {
            if (!_tallies.TryRemove(key, out var by) || by == 0) continue;
            c.Execute("""
                INSERT INTO tallies (lane, name, value) VALUES (@Lane, @Name, @by)
                ON CONFLICT (lane, name) DO UPDATE SET value = value + excluded.value
                """, new { key.Lane, key.Name, by }, tx);
        }
    }

    long InsertEntry(SqliteConnection c, SqliteTransaction tx, NewEntry e, DateTimeOffset now)
    {
        var created = e.Created.ToUnixTimeMilliseconds();
        var existed = c.ExecuteScalar<long?>("SELECT id FROM entries WHERE scope_key = @ScopeKey AND normalized = @Normalized",
            new { e.ScopeKey, e.Normalized }, tx);
        var id = c.ExecuteScalar<long>("""
            INSERT INTO entries (scope_key, partition_hash, lane, question, normalized, vector, model_id, content, scores,
                                 response_model, prompt_tokens, completion_tokens, created, last_hit, hit_count)
            VALUES (@ScopeKey, @PartitionHash, @Lane, @Question, @Normalized, @vector, @ModelId, @Content, @scores,
                    @ResponseModel, @PromptTokens, @CompletionTokens, @created, @created, 0)
            ON CONFLICT (scope_key, normalized) DO UPDATE SET
                question = excluded.question, vector = excluded.vector, model_id = excluded.model_id,
                content = excluded.content, scores = excluded.scores, response_model = excluded.response_model,
                prompt_tokens = excluded.prompt_tokens, completion_tokens = excluded.completion_tokens,
                created = excluded.created, last_hit = excluded.last_hit, hit_count = 0
            RETURNING id
            """, new
        {
            e.ScopeKey, e.PartitionHash, e.Lane, e.Question, e.Normalized,
            vector = e.Vector is null ? null : MemoryMarshal.AsBytes(e.Vector.AsSpan()).ToArray(),
            e.ModelId, e.Content, scores = JsonSerializer.Serialize(e.Scores), e.ResponseModel, e.PromptTokens, e.CompletionTokens, created,
        }, tx);
        SqliteChangeFeed.Put(c, tx, id, now.ToUnixTimeMilliseconds());
        if (existed is null) _entryCount++;
        return id;
    }

    static void InsertEvent(SqliteConnection c, SqliteTransaction tx, EventRow r) => c.Execute("""
        INSERT INTO events (at, lane, partition_hash, kind, question, candidate, score, verdict, reason)
        VALUES (@at, @Lane, @PartitionHash, @Kind, @Question, @Candidate, @Score, @Verdict, @Reason)
        """, new { at = r.At.ToUnixTimeMilliseconds(), r.Lane, r.PartitionHash, r.Kind, r.Question, r.Candidate, r.Score, r.Verdict, r.Reason }, tx);

    static void InsertTemplate(SqliteConnection c, SqliteTransaction tx, TemplateRow t) => c.Execute("""
        INSERT INTO templates (learn_key, lane, partition_hash, prefix, suffix, learned_from, learned_at)
        VALUES (@LearnKey, @Lane, @PartitionHash, @Prefix, @Suffix, @LearnedFrom, @at)
        ON CONFLICT (learn_key, prefix, suffix) DO NOTHING
        """, new { t.LearnKey, t.Lane, t.PartitionHash, t.Prefix, t.Suffix, t.LearnedFrom, at = t.LearnedAt.ToUnixTimeMilliseconds() }, tx);

    List<long> Purge(SqliteConnection c, SqliteTransaction tx, PurgeFilter f, DateTimeOffset now)
    {
        if (SqlitePurgeCondition.Templates(f, now) is { } templates)
            c.Execute($"DELETE FROM templates WHERE {templates.Where}", templates.Parameters, tx);
        var (where, parameters) = SqlitePurgeCondition.Entries(f, now);
        return DeleteEntries(c, tx, where, parameters, now);
    }

    /// <summary>Least recently hit entries beyond Store:MaxEntries go first.</summary>
    int EvictOverflow(SqliteConnection c, SqliteTransaction tx, DateTimeOffset now)
    {
        if (_entryCount <= _options.MaxEntries) return 0;
        var parameters = new DynamicParameters(new { excess = _entryCount - _options.MaxEntries });
        return DeleteEntries(c, tx, "id IN (SELECT id FROM entries ORDER BY last_hit, id LIMIT @excess)", parameters, now).Count;
    }

    List<long> DeleteEntries(SqliteConnection c, SqliteTransaction tx, string where, DynamicParameters parameters, DateTimeOffset now)
    {
        var ids = SqliteChangeFeed.DeleteEntries(c, tx, where, parameters, now.ToUnixTimeMilliseconds());
        _entryCount -= ids.Count;
        return ids;
    }

    void Sweep(TimeSpan keepChangesFor, long maxChangesKept)
    {
        if (!File.Exists(FilePath))
        {
            RequestRecovery(Recovery.Gone);
            return;
        }
        var expired = 0;
        try
        {
            using var c = Connect();
            using var tx = c.BeginTransaction();
            var now = DateTimeOffset.UtcNow;
            var minCreated = (now - _options.Ttl).ToUnixTimeMilliseconds();
            expired = DeleteEntries(c, tx, "created < @minCreated", new DynamicParameters(new { minCreated }), now).Count;
            c.Execute("DELETE FROM templates WHERE learned_at < @minCreated", new { minCreated }, tx);
            _eventCount -= c.Execute("DELETE FROM events WHERE at < @min", new { min = (now - _events.Retention).ToUnixTimeMilliseconds() }, tx);
            SqliteChangeFeed.Prune(c, tx, now, keepChangesFor, maxChangesKept);
            tx.Commit();
        }
        catch (Exception e) when (e is SqliteException or InvalidOperationException or IOException)
        {
            _log.LogError("store: expiry sweep failed: {Reason}", e.Message);
        }
        if (expired > 0) RaiseChangesAvailable();
    }
}
