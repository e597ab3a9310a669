using Dapper;
using Microsoft.Extensions.Logging;
using Npgsql;

namespace RewriteProxy.Store.Postgres;

/// <summary>
/// Numbered schema migrations; the table <c>schema_version</c> holds one row per step applied. Append, never edit.
/// Times are <c>timestamptz</c> written at millisecond precision (what the SQLite store keeps), vectors are
/// <c>bytea</c> (see step 1), and long texts that must be unique are keyed by their SHA-256 (a B-tree entry holds at
/// most about 2.7 kB, and a normalised question or a template's prefix can be longer).
/// </summary>
public static class PostgresMigrations
{
    public static readonly string[] Steps =
    [
        // 1: entries, their change feed, and the store's identity and counters.
        // The vector is bytea: the 384 (or so) float32 values in little-endian order, the same bytes the SQLite store
        // keeps, written and read as one value with no per-element encoding (real[] costs a length word per element
        // on the wire and an element-by-element decode). The index lives in each replica's memory, so the database
        // never computes with vectors.
        """
        CREATE TABLE meta (
            key   text PRIMARY KEY,
            value text NOT NULL
        );
        CREATE TABLE counters (
            name  text PRIMARY KEY,
            value bigint NOT NULL
        );
        INSERT INTO counters (name, value) VALUES ('entries', 0), ('pruned_through', 0);
        CREATE TABLE entries (
            id                bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
            scope_key         text        NOT NULL,
            normalized_hash   bytea       NOT NULL,
            partition_hash    text        NOT NULL,
            lane              text        NOT NULL,
            question          text        NOT NULL,
            normalized        text        NOT NULL,
            vector            bytea,
            model_id          text,
            content           text        NOT NULL,
            scores            jsonb       NOT NULL,
            response_model    text,
            prompt_tokens     bigint      NOT NULL,
            completion_tokens bigint      NOT NULL,
            created           timestamptz NOT NULL,
            last_hit          timestamptz NOT NULL,
            hit_count         bigint      NOT NULL DEFAULT 0
        );
        CREATE UNIQUE INDEX entries_exact ON entries (scope_key, normalized_hash);
        CREATE INDEX entries_last_hit ON entries (last_hit, id);
        CREATE INDEX entries_created ON entries (created);
        CREATE INDEX entries_lane ON entries (lane);
        CREATE INDEX entries_partition ON entries (partition_hash);
        CREATE TABLE changes (
            seq      bigserial PRIMARY KEY,
            entry_id bigint      NOT NULL,
            kind     "char"      NOT NULL,
            at       timestamptz NOT NULL DEFAULT now()
        );
        CREATE INDEX changes_at ON changes (at);
        """,
        // 2: event log of guarded rewrites and anchor-guard refusals
        """
        CREATE TABLE events (
            id             bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
            at             timestamptz      NOT NULL,
            lane           text             NOT NULL,
            partition_hash text             NOT NULL,
            kind           text             NOT NULL,
            question       text             NOT NULL,
            candidate      text             NOT NULL,
            score          double precision NOT NULL,
            verdict        text             NOT NULL,
            reason         text
        );
        CREATE INDEX events_at ON events (at);
        CREATE INDEX events_lane_at ON events (lane, at);
        """,
        // 3: per-lane tallies, kept across restarts
        """
        CREATE TABLE tallies (
            lane  text   NOT NULL,
            name  text   NOT NULL,
            value bigint NOT NULL,
            PRIMARY KEY (lane, name)
        );
        """,
        // 4: prompt templates learned from traffic (the same fields as the SQLite store's); kept once per learning
        // key, prefix and suffix, the pair keyed by its hash
        """
        CREATE TABLE templates (
            learn_key      text        NOT NULL,
            template_hash  bytea       NOT NULL,
            lane           text        NOT NULL,
            partition_hash text        NOT NULL,
            prefix         text        NOT NULL,
            suffix         text        NOT NULL,
            learned_from   integer     NOT NULL,
            learned_at     timestamptz NOT NULL,
            PRIMARY KEY (learn_key, template_hash)
        );
        CREATE INDEX templates_learned_at ON templates (learned_at);
        """,
        // 5: claims on misses in flight, for single flight across replicas; expires is the database's clock
        """
        CREATE TABLE claims (
            scope_key       text        NOT NULL,
            normalized_hash bytea       NOT NULL,
            holder          text        NOT NULL,
            expires         timestamptz NOT NULL,
            PRIMARY KEY (scope_key, normalized_hash)
        );
        """,
    ];

    /// <summary>
    /// Applies the missing steps in one transaction under <see cref="PostgresLocks.Migrations"/>, so replicas starting
    /// at once take turns: the first migrates, the others find it done. Returns the store id (made by the first).
    /// </summary>
    public static async Task<string> MigrateAsync(NpgsqlConnection c, ILogger log, string location, CancellationToken cancel)
    {
        await using var tx = await c.BeginTransactionAsync(cancel);
        await c.ExecuteAsync(Command("SELECT pg_advisory_xact_lock(@key)", new { key = PostgresLocks.Migrations }, tx, cancel));
        await c.ExecuteAsync(Command("""
            CREATE TABLE IF NOT EXISTS schema_version (
                version    integer PRIMARY KEY,
                applied_at timestamptz NOT NULL DEFAULT now()
            )
            """, null, tx, cancel));
        var version = await c.ExecuteScalarAsync<int>(Command("SELECT coalesce(max(version), 0) FROM schema_version", null, tx, cancel));
        if (version > Steps.Length)
            throw new StoreException($"{location} has schema version {version}, newer than this proxy's {Steps.Length}: run the newer proxy");
        for (var step = version; step < Steps.Length; step++)
        {
            await c.ExecuteAsync(Command(Steps[step], null, tx, cancel));
            await c.ExecuteAsync(Command("INSERT INTO schema_version (version) VALUES (@v)", new { v = step + 1 }, tx, cancel));
            log.LogInformation("store: applied migration {Step} at {Location}", step + 1, location);
        }
        await c.ExecuteAsync(Command("INSERT INTO meta (key, value) VALUES ('store_id', @id) ON CONFLICT (key) DO NOTHING",
            new { id = Guid.NewGuid().ToString("N") }, tx, cancel));
        var storeId = await c.ExecuteScalarAsync<string>(Command("SELECT value FROM meta WHERE key = 'store_id'", null, tx, cancel));
        await tx.CommitAsync(cancel);
        return storeId!;
    }

    /// <summary>Read-only: the schema must be there and of this proxy's version; nothing is created. Returns the store id.</summary>
    public static async Task<string> CheckAsync(NpgsqlConnection c, string location, CancellationToken cancel)
    {
        var exists = await c.ExecuteScalarAsync<bool>(Command("SELECT to_regclass('schema_version') IS NOT NULL", null, null, cancel));
        if (!exists) throw new StoreException($"{location} holds no RewriteProxy store (no schema_version table): start the proxy once to create it");
        var version = await c.ExecuteScalarAsync<int>(Command("SELECT coalesce(max(version), 0) FROM schema_version", null, null, cancel));
        if (version > Steps.Length)
            throw new StoreException($"{location} has schema version {version}, newer than this proxy's {Steps.Length}: run the newer proxy");
        if (version < Steps.Length)
            throw new StoreException($"{location} has schema version {version}, older than this proxy's {Steps.Length}: start the proxy once to migrate it");
        return await c.ExecuteScalarAsync<string>(Command("SELECT value FROM meta WHERE key = 'store_id'", null, null, cancel))
            ?? throw new StoreException($"{location} has no store id: the store is damaged");
    }

    static CommandDefinition Command(string sql, object? parameters, NpgsqlTransaction? tx, CancellationToken cancel) =>
        new(sql, parameters, tx, PostgresConnector.LongCommandSeconds, cancellationToken: cancel);
}

/// <summary>
/// Keys of the store's advisory locks. Advisory locks are per database, so stores in other databases of the same
/// server never contend; the keys are arbitrary constants, unlikely to clash with another application's.
/// </summary>
public static class PostgresLocks
{
    /// <summary>Held (transaction-level) while migrating.</summary>
    public const long Migrations = 0x5250_0001;

    /// <summary>
    /// Held (transaction-level, exclusive) by every transaction that writes entries or changes, taken first, before
    /// any row is touched. Sequence numbers come from <c>nextval</c>, which does not wait for commits, so without it
    /// a transaction could take number 5, another 6 and commit first, and a reader of "after 4" would see 6, move its
    /// mark to 6 and never see 5. With it, a transaction takes its numbers only after the previous holder's commit is
    /// visible (PostgreSQL releases locks after the commit record and the snapshot update), so numbers become visible
    /// in increasing order and a reader never skips one. Taking it first also orders all writers of entries the same
    /// way, so they cannot deadlock on rows.
    /// </summary>
    public const long Changes = 0x5250_0002;

    /// <summary>Held (session-level, tried, never waited for) by the replica whose expiry and retention sweep runs.</summary>
    public const long Sweep = 0x5250_0003;
}
