using System.Data;
using Dapper;
using Npgsql;

namespace RewriteProxy.Store.Postgres;

public sealed partial class PostgresRewriteStore
{
    /// <summary>
    /// One snapshot (REPEATABLE READ) for both the sequence and the rows. Sequences become visible in commit order
    /// (<see cref="PostgresLocks.Changes"/>), so every change up to the highest one seen is in the rows and none after it.
    /// </summary>
    public async Task<VectorLoad> ReadVectorsAsync(string modelId, CancellationToken cancel)
    {
        EnsureOpen();
        return await _connector.RunLongAsync("reading vectors", async c =>
        {
            await using var tx = await c.BeginTransactionAsync(IsolationLevel.RepeatableRead, cancel);
            var sequence = await c.ExecuteScalarAsync<long>(new CommandDefinition("""
                SELECT coalesce((SELECT max(seq) FROM changes), (SELECT value FROM counters WHERE name = 'pruned_through'))
                """, transaction: tx, commandTimeout: PostgresConnector.LongCommandSeconds, cancellationToken: cancel));
            var rows = new List<IndexRow>();
            await using (var command = new NpgsqlCommand(
                "SELECT id, scope_key, vector FROM entries WHERE model_id = @modelId AND vector IS NOT NULL", c, tx))
            {
                command.CommandTimeout = PostgresConnector.LongCommandSeconds;
                command.Parameters.AddWithValue("modelId", modelId);
                await using var reader = await command.ExecuteReaderAsync(cancel);
                while (await reader.ReadAsync(cancel))
                    rows.Add(new IndexRow(reader.GetInt64(0), reader.GetString(1), PostgresValues.Vector((byte[])reader.GetValue(2))));
            }
            await tx.CommitAsync(cancel);
            return new VectorLoad(rows, sequence);
        }, cancel);
    }

    /// <summary>
    /// One statement, so one snapshot: the pruning mark and the changes after <paramref name="afterSequence"/> agree
    /// (a prune between two statements could otherwise remove changes the mark said were there). A put of an entry
    /// gone since reads without scope and vector: the delete that follows it says the same. Null when the changes after
    /// the mark were pruned, or when the mark is beyond every sequence this store has handed out (the database was
    /// made anew under the reader).
    /// </summary>
    public async Task<IReadOnlyList<StoreChange>?> ChangesAfterAsync(long afterSequence, int limit, CancellationToken cancel)
    {
        EnsureOpen();
        var rows = await _connector.RunAsync("reading changes", c => c.QueryAsync<ChangeRecord>(new CommandDefinition("""
            SELECT p.value AS PrunedThrough, (SELECT last_value FROM changes_seq_seq) AS LastIssued,
                   c.seq AS Sequence, c.entry_id AS EntryId, c.kind AS Kind, e.scope_key AS ScopeKey, e.vector AS Vector, e.model_id AS ModelId
            FROM (SELECT value FROM counters WHERE name = 'pruned_through') AS p
            LEFT JOIN LATERAL (SELECT seq, entry_id, kind FROM changes WHERE seq > @afterSequence ORDER BY seq LIMIT @limit) AS c ON true
            LEFT JOIN entries AS e ON e.id = c.entry_id AND c.kind = 'P'
            ORDER BY c.seq
            """, new { afterSequence, limit }, cancellationToken: cancel)), cancel);
        var list = rows.AsList();
        if (list.Count == 0) return [];
        if (afterSequence < list[0].PrunedThrough || afterSequence > list[0].LastIssued) return null;
        return list.Where(r => r.Sequence is not null).Select(r => new StoreChange(r.Sequence!.Value, r.EntryId!.Value,
            r.Kind == 'P' ? ChangeKind.Put : ChangeKind.Delete, r.ScopeKey, r.Vector is null ? null : PostgresValues.Vector(r.Vector),
            r.ModelId)).ToList();
    }

    sealed record ChangeRecord
    {
        public long PrunedThrough { get; init; }
        public long LastIssued { get; init; }
        public long? Sequence { get; init; }
        public long? EntryId { get; init; }
        public char? Kind { get; init; }
        public string? ScopeKey { get; init; }
        public byte[]? Vector { get; init; }
        public string? ModelId { get; init; }
    }
}
