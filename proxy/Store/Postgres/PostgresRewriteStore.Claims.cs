using Dapper;

namespace RewriteProxy.Store.Postgres;

/// <summary>
/// Single flight across replicas: a claim is a row per (scope, normalised question) with its holder and an expiry
/// on the database's clock (replicas' clocks may differ; the database's is the one they share). A claim is taken
/// when there is none, when the one there has expired (its holder crashed or hung), or when this store already
/// holds it. Releasing deletes it and notifies, so waiters on every replica are woken through ChangesAvailable.
/// </summary>
public sealed partial class PostgresRewriteStore
{
    public async Task<bool> ClaimMissAsync(string scopeKey, string normalized, TimeSpan hold, CancellationToken cancel)
    {
        EnsureWritable();
        if (hold <= TimeSpan.Zero) throw new ArgumentOutOfRangeException(nameof(hold), hold, "a claim is held for a positive time");
        var taken = await _connector.RunAsync("claiming a miss", c => c.ExecuteScalarAsync<bool?>(new CommandDefinition("""
            INSERT INTO claims AS held (scope_key, normalized_hash, holder, expires)
            VALUES (@scopeKey, @hash, @holder, clock_timestamp() + @hold)
            ON CONFLICT (scope_key, normalized_hash) DO UPDATE SET holder = excluded.holder, expires = excluded.expires
            WHERE held.expires <= clock_timestamp() OR held.holder = excluded.holder
            RETURNING true
            """, new { scopeKey, hash = PostgresValues.Hash(normalized), holder = _holder, hold }, cancellationToken: cancel)), cancel);
        return taken == true;
    }

    public async Task ReleaseMissAsync(string scopeKey, string normalized, CancellationToken cancel)
    {
        EnsureWritable();
        await _connector.RunAsync("releasing a claim", c => c.ExecuteAsync(new CommandDefinition($"""
            DELETE FROM claims WHERE scope_key = @scopeKey AND normalized_hash = @hash AND holder = @holder;
            {PostgresEntryWrites.Notify};
            """, new { scopeKey, hash = PostgresValues.Hash(normalized), holder = _holder }, cancellationToken: cancel)), cancel);
        RaiseChangesAvailable();
    }

    public async Task<bool> IsClaimedAsync(string scopeKey, string normalized, CancellationToken cancel)
    {
        EnsureOpen();
        return await _connector.RunAsync("reading a claim", c => c.ExecuteScalarAsync<bool>(new CommandDefinition("""
            SELECT EXISTS (SELECT 1 FROM claims WHERE scope_key = @scopeKey AND normalized_hash = @hash AND expires > clock_timestamp())
            """, new { scopeKey, hash = PostgresValues.Hash(normalized) }, cancellationToken: cancel)), cancel);
    }
}
