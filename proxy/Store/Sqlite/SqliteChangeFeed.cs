using System.Runtime.InteropServices;
using Dapper;
using Microsoft.Data.Sqlite;

namespace RewriteProxy.Store.Sqlite;

/// <summary>
/// The <c>changes</c> table: written in the same transaction as every insert, replace, purge, eviction and expiry, and
/// read by every process's index follower (<see cref="IRewriteStore.ChangesAfterAsync"/>).
/// </summary>
internal static class SqliteChangeFeed
{
    /// <summary>
    /// Changes younger than this are kept (unless <see cref="MaxKept"/> is reached first): a follower or an index
    /// snapshot up to a day behind (a process stopped overnight) catches up by replaying changes, not by a rebuild.
    /// </summary>
    public static readonly TimeSpan KeepFor = TimeSpan.FromHours(24);

    /// <summary>
    /// Most changes kept, whatever their age: bounds the table (about 40 bytes a row, so some 40 MB) under heavy
    /// churn. A follower further behind than this replays more rows than a rebuild of a full default store
    /// (Store:MaxEntries 100 000) reads tenfold, so rebuilding is the cheaper way back anyway.
    /// </summary>
    public const long MaxKept = 1_000_000;

    /// <summary>Records that entry <paramref name="id"/> was stored or replaced.</summary>
    public static void Put(SqliteConnection c, SqliteTransaction tx, long id, long at) =>
        c.Execute("INSERT INTO changes (entry_id, kind, at) VALUES (@id, 'put', @at)", new { id, at }, tx);

    /// <summary>Deletes the entries matching <paramref name="where"/>, recording a delete change for each; returns their ids.</summary>
    public static List<long> DeleteEntries(SqliteConnection c, SqliteTransaction tx, string where, DynamicParameters parameters, long at)
    {
        parameters.Add("changeAt", at);
        c.Execute($"INSERT INTO changes (entry_id, kind, at) SELECT id, 'delete', @changeAt FROM entries WHERE {where} ORDER BY id",
            parameters, tx);
        return c.Query<long>($"DELETE FROM entries WHERE {where} RETURNING id", parameters, tx).AsList();
    }

    /// <summary>The newest sequence ever given (0 before the first change); pruning never lowers it.</summary>
    public static long Newest(SqliteConnection c, SqliteTransaction tx) =>
        c.ExecuteScalar<long?>("SELECT seq FROM sqlite_sequence WHERE name = 'changes'", transaction: tx) ?? 0;

    /// <summary>Changes after <paramref name="after"/>, oldest first; null when some of them are no longer kept, or never were.</summary>
    public static IReadOnlyList<StoreChange>? After(SqliteConnection c, SqliteTransaction tx, long after, int limit)
    {
        var newest = Newest(c, tx);
        // Newer than anything this store gave: the store was made anew under the reader.
        if (after > newest) return null;
        // The oldest kept change must directly follow the reader's, or the ones between were pruned.
        var oldest = c.ExecuteScalar<long?>("SELECT MIN(sequence) FROM changes", transaction: tx) ?? newest + 1;
        if (after < oldest - 1) return null;
        var changes = new List<StoreChange>();
        using var reader = c.ExecuteReader("""
            SELECT ch.sequence, ch.entry_id, ch.kind, e.scope_key, e.vector, e.model_id
            FROM changes ch LEFT JOIN entries e ON ch.kind = 'put' AND e.id = ch.entry_id
            WHERE ch.sequence > @after ORDER BY ch.sequence LIMIT @limit
            """, new { after, limit }, tx);
        while (reader.Read())
        {
            var put = reader.GetString(2) == "put";
            // A put whose entry is gone by now reads without a vector: the delete that follows it says the same.
            var vector = put && !reader.IsDBNull(4) ? MemoryMarshal.Cast<byte, float>((byte[])reader.GetValue(4)).ToArray() : null;
            changes.Add(new StoreChange(reader.GetInt64(0), reader.GetInt64(1), put ? ChangeKind.Put : ChangeKind.Delete,
                reader.IsDBNull(3) ? null : reader.GetString(3), vector, reader.IsDBNull(5) ? null : reader.GetString(5)));
        }
        return changes;
    }

    /// <summary>Drops changes older than <paramref name="keepFor"/> and all but the newest <paramref name="maxKept"/>.</summary>
    public static int Prune(SqliteConnection c, SqliteTransaction tx, DateTimeOffset now, TimeSpan keepFor, long maxKept) => c.Execute(
        "DELETE FROM changes WHERE at < @min OR sequence <= (SELECT MAX(sequence) FROM changes) - @maxKept",
        new { min = (now - keepFor).ToUnixTimeMilliseconds(), maxKept }, tx);
}
