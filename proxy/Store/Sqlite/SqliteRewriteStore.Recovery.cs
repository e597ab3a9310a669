using Dapper;
using Microsoft.Data.Sqlite;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Store.Sqlite;

/// <summary>
/// A store file deleted or damaged under a running process: the writer starts an empty store in its place (with a new
/// <see cref="StoreId"/>, so followers and snapshots rebuild) rather than failing every request until a restart.
/// </summary>
public sealed partial class SqliteRewriteStore
{
    enum Recovery { None, Gone, Corrupt }

    /// <summary>Least time between two recovery attempts, so a store that cannot be recreated is not retried on every request.</summary>
    static readonly TimeSpan RecoveryBackoff = TimeSpan.FromSeconds(5);
    int _recovery;
    DateTimeOffset _lastRecovery = DateTimeOffset.MinValue;

    static bool IsCorruption(SqliteException e) => e.SqliteErrorCode is 11 /* SQLITE_CORRUPT */ or 26 /* SQLITE_NOTADB */;

    void RequestRecovery(Recovery what)
    {
        // A read-only store has no writer to recover with, and must never create a file.
        if (ReadOnly) return;
        if (Interlocked.CompareExchange(ref _recovery, (int)what, (int)Recovery.None) == (int)Recovery.None)
            _queue.Writer.TryWrite(new WriteOp.Barrier()); // wakes the writer, which recovers
    }

    /// <summary>
    /// On the writer: a deleted file is recreated empty (pooled connections would otherwise keep writing to an unlinked
    /// inode); a corrupt file is moved aside as <c>{path}.corrupt-{time}</c>, kept for inspection, and replaced by an empty one.
    /// </summary>
    void RecoverIfAsked()
    {
        var what = (Recovery)Volatile.Read(ref _recovery);
        if (what == Recovery.None) return;
        if (DateTimeOffset.UtcNow - _lastRecovery < RecoveryBackoff)
        {
            Volatile.Write(ref _recovery, (int)Recovery.None);
            return;
        }
        _lastRecovery = DateTimeOffset.UtcNow;
        ReleaseConnections();
        try
        {
            if (what == Recovery.Corrupt)
            {
                var aside = $"{FilePath}.corrupt-{DateTimeOffset.UtcNow:yyyyMMddTHHmmss}";
                foreach (var suffix in new[] { "", "-wal", "-shm" })
                    if (File.Exists(FilePath + suffix)) File.Move(FilePath + suffix, aside + suffix, overwrite: true);
                _log.LogError("store: {Path} is damaged; moved it to {Aside} and started an empty store", FilePath, aside);
            }
            else
            {
                _log.LogError("store: {Path} is gone; starting an empty store", FilePath);
            }
            Open();
            // The new file's change feed starts again at 0: followers learn of it (a new store id, an unknown sequence) and rebuild.
            RaiseChangesAvailable();
        }
        catch (Exception e) when (e is StoreException or IOException or UnauthorizedAccessException)
        {
            _log.LogError("store: cannot start an empty store at {Path}: {Reason}", FilePath, e.Message);
        }
        finally
        {
            Volatile.Write(ref _recovery, (int)Recovery.None);
        }
    }

    void RecountAfterFailure()
    {
        try
        {
            using var c = Connect();
            _entryCount = c.ExecuteScalar<long>("SELECT COUNT(*) FROM entries;");
            _eventCount = c.ExecuteScalar<long>("SELECT COUNT(*) FROM events;");
        }
        catch (Exception e) when (e is SqliteException or InvalidOperationException or IOException)
        {
            // The store is unusable for now; counts are refreshed on the next success.
        }
    }
}
