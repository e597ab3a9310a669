using Dapper;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Store.Postgres;

public sealed partial class PostgresRewriteStore
{
    /// <summary>Most entries one expiry transaction deletes: the changes lock is held briefly, so misses never wait long behind a sweep.</summary>
    const int ExpiryChunk = 1_000;

    /// <summary>
    /// Changes younger than this are kept for followers to catch up (unless <see cref="ChangesKeptAtMost"/> is reached
    /// first): a replica or an index snapshot up to a day behind (a process stopped overnight) replays changes instead
    /// of rebuilding. The same span as the SQLite store's.
    /// </summary>
    internal static readonly TimeSpan ChangesKeptFor = TimeSpan.FromHours(24);

    /// <summary>
    /// Most changes kept, whatever their age: bounds the table (some 50 bytes a row) under heavy churn; a follower
    /// further behind than this reads more rows replaying than a rebuild of a full default store. As the SQLite store.
    /// </summary>
    internal const long ChangesKeptAtMost = 1_000_000;

    public async Task<long> AddAsync(NewEntry entry, CancellationToken cancel)
    {
        EnsureWritable();
        var id = await _connector.RunAsync("storing an entry", async c =>
        {
            await using var tx = await c.BeginTransactionAsync(cancel);
            var stored = await PostgresEntryWrites.AddAsync(c, tx, entry, _options.MaxEntries, cancel);
            await tx.CommitAsync(cancel);
            return stored;
        }, cancel);
        RaiseChangesAvailable();
        return id;
    }

    public async Task<IReadOnlyList<long>> PurgeAsync(PurgeFilter filter, CancellationToken cancel)
    {
        if (filter.IsEmpty) throw new ArgumentException("a purge needs at least one of lane, partition, age or id");
        EnsureWritable();
        var ids = await _connector.RunLongAsync("purging entries", async c =>
        {
            await using var tx = await c.BeginTransactionAsync(cancel);
            var gone = await PostgresEntryWrites.PurgeAsync(c, tx, filter, cancel);
            await tx.CommitAsync(cancel);
            return gone;
        }, cancel);
        if (ids.Count > 0) RaiseChangesAvailable();
        return ids;
    }

    public async Task<long> CountMatchingAsync(PurgeFilter filter, CancellationToken cancel)
    {
        if (filter.IsEmpty) throw new ArgumentException("a purge needs at least one of lane, partition, age or id");
        EnsureOpen();
        return await _connector.RunLongAsync("counting entries", c => c.ExecuteScalarAsync<long>(new CommandDefinition(
            $"SELECT count(*) FROM entries WHERE {PostgresEntryWrites.PurgeCondition}", PostgresEntryWrites.PurgeParameters(filter),
            commandTimeout: PostgresConnector.LongCommandSeconds, cancellationToken: cancel)), cancel);
    }

    public void RecordHit(long id, DateTimeOffset at) => _writer?.RecordHit(id, at);

    public void Count(string lane, string name, long by = 1) => _writer?.Count(lane, name, by);

    public void AppendEvent(EventRow row)
    {
        if (_events.Enabled) _writer?.Append(row);
    }

    public void SaveTemplate(TemplateRow row) => _writer?.Append(row);

    public Task FlushAsync(CancellationToken cancel)
    {
        EnsureOpen();
        return _writer?.FlushAsync(cancel) ?? Task.CompletedTask;
    }

    /// <summary>Runs the sweep now (tests; the writer runs it every <see cref="PostgresWriter.SweepEvery"/>).</summary>
    internal Task SweepNowAsync(CancellationToken cancel) => Sweep(ChangesKeptFor, ChangesKeptAtMost, cancel);

    /// <summary>Runs the sweep now with other limits of change pruning (the contract suite's hook).</summary>
    internal Task SweepNowAsync(TimeSpan keepChangesFor, long maxChangesKept, CancellationToken cancel) =>
        Sweep(keepChangesFor, maxChangesKept, cancel);

    Task Sweep(CancellationToken cancel) => Sweep(ChangesKeptFor, ChangesKeptAtMost, cancel);

    /// <summary>
    /// Expiry, eviction, retention and pruning, by queries in the database. Whichever replica's sweep gets the
    /// session-level <see cref="PostgresLocks.Sweep"/> lock runs it; the others skip this round. Expired entries are
    /// deleted in chunks, each in its own short transaction holding the changes lock and writing a delete change per entry.
    /// </summary>
    static async Task UnlockSweepAsync(Npgsql.NpgsqlConnection c)
    {
        try
        {
            await c.ExecuteAsync(new CommandDefinition("SELECT pg_advisory_unlock(@key)", new { key = PostgresLocks.Sweep }));
        }
        catch (Exception e) when (PostgresConnector.IsDatabaseFailure(e))
        {
            // The connection broke: the server released the session's lock with it.
        }
    }

    async Task Sweep(TimeSpan keepChangesFor, long maxChangesKept, CancellationToken cancel)
    {
        var expired = 0;
        var evicted = 0;
        await _connector.RunLongAsync("sweeping the store", async c =>
        {
            var command = new CommandDefinition("SELECT pg_try_advisory_lock(@key)", new { key = PostgresLocks.Sweep }, cancellationToken: cancel);
            if (!await c.ExecuteScalarAsync<bool>(command)) return 0;
            try
            {
                var before = DateTimeOffset.UtcNow - _options.Ttl;
                int chunk;
                do
                {
                    await using var tx = await c.BeginTransactionAsync(cancel);
                    await PostgresEntryWrites.LockChangesAsync(c, tx, PostgresConnector.LongCommandSeconds, cancel);
                    chunk = await PostgresEntryWrites.ExpireAsync(c, tx, before, ExpiryChunk, cancel);
                    await tx.CommitAsync(cancel);
                    expired += chunk;
                } while (chunk == ExpiryChunk);
                await using (var tx = await c.BeginTransactionAsync(cancel))
                {
                    await PostgresEntryWrites.LockChangesAsync(c, tx, PostgresConnector.LongCommandSeconds, cancel);
                    evicted = await PostgresEntryWrites.RecountAndEvictAsync(c, tx, _options.MaxEntries, cancel);
                    await tx.CommitAsync(cancel);
                }
                await c.ExecuteAsync(new CommandDefinition("""
                    DELETE FROM templates WHERE learned_at < @before;
                    DELETE FROM events WHERE at < @eventsBefore;
                    DELETE FROM events WHERE id <= (SELECT max(id) FROM events) - @maxEvents;
                    DELETE FROM claims WHERE expires < now();
                    WITH gone AS (DELETE FROM changes WHERE seq <= greatest(
                        (SELECT max(seq) FROM changes WHERE at < @changesBefore), (SELECT max(seq) FROM changes) - @maxChanges) RETURNING seq)
                    UPDATE counters SET value = greatest(value, (SELECT max(seq) FROM gone))
                    WHERE name = 'pruned_through' AND EXISTS (SELECT 1 FROM gone);
                    """, new
                {
                    before = PostgresValues.Time(before),
                    eventsBefore = PostgresValues.Time(DateTimeOffset.UtcNow - _events.Retention),
                    maxEvents = _events.MaxRows,
                    changesBefore = PostgresValues.Time(DateTimeOffset.UtcNow - keepChangesFor),
                    maxChanges = maxChangesKept,
                }, commandTimeout: PostgresConnector.LongCommandSeconds, cancellationToken: cancel));
            }
            finally
            {
                await UnlockSweepAsync(c);
            }
            return 0;
        }, cancel);
        if (expired + evicted > 0)
        {
            _log.LogInformation("store: the sweep deleted {Expired} expired and {Evicted} evicted entries", expired, evicted);
            RaiseChangesAvailable();
        }
    }
}
