namespace RewriteProxy.Store.Sqlite;

/// <summary>Numbered schema migrations; <c>PRAGMA user_version</c> holds the last one applied. Append, never edit.</summary>
internal static class SqliteMigrations
{
    /// <summary>The schema version from which the <c>meta</c> table (the store's id) is there.</summary>
    public const int MetaStep = 5;

    public static readonly string[] Steps =
    [
        // 1: entries
        """
        CREATE TABLE entries (
            id                INTEGER PRIMARY KEY,
            scope_key         TEXT    NOT NULL,
            partition_hash    TEXT    NOT NULL,
            lane              TEXT    NOT NULL,
            question          TEXT    NOT NULL,
            normalized        TEXT    NOT NULL,
            vector            BLOB,
            model_id          TEXT,
            content           TEXT    NOT NULL,
            scores            TEXT    NOT NULL,
            response_model    TEXT,
            prompt_tokens     INTEGER NOT NULL,
            completion_tokens INTEGER NOT NULL,
            created           INTEGER NOT NULL,
            last_hit          INTEGER NOT NULL,
            hit_count         INTEGER NOT NULL DEFAULT 0
        );
        CREATE UNIQUE INDEX entries_exact ON entries (scope_key, normalized);
        CREATE INDEX entries_last_hit ON entries (last_hit);
        CREATE INDEX entries_created ON entries (created);
        CREATE INDEX entries_lane ON entries (lane);
        """,
        // 2: event log of guarded rewrites and anchor-guard refusals
        """
        CREATE TABLE events (
            id             INTEGER PRIMARY KEY,
            at             INTEGER NOT NULL,
            lane           TEXT    NOT NULL,
            partition_hash TEXT    NOT NULL,
            kind           TEXT    NOT NULL,
            question       TEXT    NOT NULL,
            candidate      TEXT    NOT NULL,
            score          REAL    NOT NULL,
            verdict        TEXT    NOT NULL,
            reason         TEXT
        );
        CREATE INDEX events_at ON events (at);
        CREATE INDEX events_lane_at ON events (lane, at);
        """,
        // 3: per-lane tallies (lookups by result, drops and refusals by reason, tokens saved), kept across restarts
        """
        CREATE TABLE tallies (
            lane  TEXT    NOT NULL,
            name  TEXT    NOT NULL,
            value INTEGER NOT NULL,
            PRIMARY KEY (lane, name)
        ) WITHOUT ROWID;
        """,
        // 4: prompt templates learned from traffic, per learning key (a hash of lane, model, other messages,
        // parameters and partition); the question is what lies between prefix and suffix
        """
        CREATE TABLE templates (
            learn_key      TEXT    NOT NULL,
            lane           TEXT    NOT NULL,
            partition_hash TEXT    NOT NULL,
            prefix         TEXT    NOT NULL,
            suffix         TEXT    NOT NULL,
            learned_from   INTEGER NOT NULL,
            learned_at     INTEGER NOT NULL,
            PRIMARY KEY (learn_key, prefix, suffix)
        );
        CREATE INDEX templates_learned_at ON templates (learned_at);
        """,
        // 5: the store's identity, made once when the store is created: a store made anew has another, so an index
        // snapshot or a follower that knew the old one rebuilds instead of trusting ids that now mean other entries
        """
        CREATE TABLE meta (
            key   TEXT NOT NULL PRIMARY KEY,
            value TEXT NOT NULL
        ) WITHOUT ROWID;
        INSERT INTO meta (key, value) VALUES ('store_id', lower(hex(randomblob(16))));
        """,
        // 6: the change feed: one row per stored, replaced or deleted entry, written in the transaction that changes
        // the entry; AUTOINCREMENT so a sequence is never reused, even after the newest changes are pruned
        """
        CREATE TABLE changes (
            sequence INTEGER PRIMARY KEY AUTOINCREMENT,
            entry_id INTEGER NOT NULL,
            kind     TEXT    NOT NULL CHECK (kind IN ('put', 'delete')),
            at       INTEGER NOT NULL
        );
        CREATE INDEX changes_at ON changes (at);
        """,
    ];
}
