using System.Diagnostics;
using Microsoft.Extensions.Hosting;
using Microsoft.Extensions.Logging;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;

namespace RewriteProxy.Cache.Snapshots;

/// <summary>
/// Index snapshots over the proxy's life (<c>Store:IndexSnapshotPath</c>, <c>Store:IndexSnapshotInterval</c>). At start
/// the index is loaded from the snapshot and caught up from the store by change sequence; a snapshot that is missing,
/// or must not be trusted, is named in the log with the reason, and the index is rebuilt from the store instead.
/// While running, the index is saved after a rebuild, every interval when it changed, and when the proxy stops.
/// </summary>
public sealed class IndexSnapshots(IRewriteStore store, VectorIndex index, IndexFollower follower, string modelId, StoreOptions options,
    ILogger log) : IHostedService, IAsyncDisposable
{
    readonly CancellationTokenSource _stop = new();
    readonly SemaphoreSlim _saving = new(1, 1);
    long _savedSequence = -1;
    Task? _loop;

    string SnapshotPath => options.IndexSnapshotPath;

    bool Enabled => SnapshotPath.Length > 0;

    /// <summary>Loads (or rebuilds) the index, then follows the store; completes once the index holds the store.</summary>
    public async Task StartFollowingAsync()
    {
        if (Enabled && await LoadAsync() is { } sequence)
        {
            _savedSequence = sequence;
            await follower.StartAsync(sequence);
        }
        else
        {
            await follower.StartWithRebuildAsync();
            // A rebuild of a large index takes minutes: keep it, so a crash before the first interval does not cost another.
            await SaveAsync("rebuilt");
        }
        if (Enabled) _loop = Task.Run(SaveEveryIntervalAsync);
    }

    /// <summary>A snapshot read and checked as far as it can be without the store; its scopes not yet published.</summary>
    sealed record Read(IndexSnapshotHeader Header, List<ScopeIndex> Scopes, TimeSpan Took);

    Task<Read?>? _reading;

    /// <summary>
    /// Starts reading the snapshot while the store opens (call it before): both take seconds at a million entries,
    /// mostly waiting on the disk, so the restart costs the longer of the two, not their sum. Everything that needs no
    /// store is checked here: the file, the model, the vector width, the graphs.
    /// </summary>
    public void BeginReading()
    {
        if (Enabled && _reading is null) _reading = Task.Run(ReadChecked);
    }

    Read? ReadChecked()
    {
        if (!File.Exists(SnapshotPath))
        {
            log.LogInformation("cache: no index snapshot at {Path}; rebuilding the index from the store", SnapshotPath);
            return null;
        }
        var watch = Stopwatch.StartNew();
        try
        {
            using var reader = IndexSnapshotReader.Open(SnapshotPath);
            reader.Check(modelId, index.Dimensions, index.Hnsw);
            return new Read(reader.Header, reader.ReadScopes(index.Hnsw), watch.Elapsed);
        }
        catch (Exception e) when (e is SnapshotRejectedException or IOException or UnauthorizedAccessException)
        {
            NotUsed(e);
            return null;
        }
    }

    /// <summary>The snapshot's change sequence once its scopes are in the index; null when there is none to trust.</summary>
    async Task<long?> LoadAsync()
    {
        BeginReading();
        if (await _reading! is not { } read) return null;
        var watch = Stopwatch.StartNew();
        var header = read.Header;
        try
        {
            IndexSnapshotReader.CheckStore(header, store.StoreId);
            if (await store.ChangesAfterAsync(header.Sequence, 1, _stop.Token) is null)
                throw new SnapshotRejectedException(SnapshotRejection.ChangesGone,
                    $"the store no longer holds the changes after {header.Sequence} (pruned, or an older copy of the store)");
            index.Restore(read.Scopes);
        }
        catch (Exception e) when (e is SnapshotRejectedException or StoreException)
        {
            foreach (var scope in read.Scopes) scope.Dispose();
            NotUsed(e);
            return null;
        }
        log.LogInformation("cache: index loaded from snapshot {Path} in {Ms} ms (read while the store opened) + {PublishMs} ms: {Entries} " +
            "entries in {Scopes} scopes ({Graphs} graphs), saved {SavedAt:u} at change {Sequence}; catching up from the store", SnapshotPath,
            (long)read.Took.TotalMilliseconds, watch.ElapsedMilliseconds, header.Entries, header.Scopes, header.Graphs, header.SavedAt,
            header.Sequence);
        return header.Sequence;
    }

    void NotUsed(Exception e) => log.LogWarning("cache: index snapshot {Path} not used ({Reason}: {Detail}); rebuilding the index from the store",
        SnapshotPath, e is SnapshotRejectedException r ? LabelValue.Of(r.Reason) : "unreadable", e.Message);

    async Task SaveEveryIntervalAsync()
    {
        using var timer = new PeriodicTimer(options.IndexSnapshotInterval);
        try
        {
            while (await timer.WaitForNextTickAsync(_stop.Token)) await SaveAsync("interval");
        }
        catch (OperationCanceledException)
        {
            // Stopped.
        }
    }

    /// <summary>Saves the index if it changed since the last save. Never throws: a failed save is logged, and the next one tried.</summary>
    public async Task SaveAsync(string why)
    {
        if (!Enabled) return;
        await _saving.WaitAsync();
        try
        {
            // Null during a rebuild, which holds part of the store: such an index must never be saved.
            if (follower.Point() is not { } point || point.Sequence == _savedSequence) return;
            var sequence = point.Sequence;
            var saved = await Task.Run(() => IndexSnapshotWriter.Save(index, new SnapshotOrigin(modelId, point.StoreId, sequence), SnapshotPath,
                stillValid: () => follower.Generation == point.Generation));
            if (saved is null)
            {
                log.LogInformation("cache: index snapshot not saved ({Why}): the index was rebuilt meanwhile", why);
                return;
            }
            _savedSequence = sequence;
            log.LogInformation("cache: index snapshot saved ({Why}) to {Path}: {Entries} entries in {Scopes} scopes ({Graphs} graphs), " +
                "{Megabytes:F1} MB in {Ms} ms, at change {Sequence}; index writers waited at most {HeldMs:F1} ms, lookups not at all", why,
                SnapshotPath, saved.Entries, saved.Scopes, saved.Graphs, saved.Bytes / 1e6, (long)saved.Elapsed.TotalMilliseconds, sequence,
                saved.LongestHold.TotalMilliseconds);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or ObjectDisposedException)
        {
            log.LogWarning("cache: index snapshot not saved ({Why}): {Reason}", why, e.Message);
        }
        finally
        {
            _saving.Release();
        }
    }

    Task IHostedService.StartAsync(CancellationToken cancel) => Task.CompletedTask;

    /// <summary>A graceful stop saves the index, so the next start loads rather than rebuilds it.</summary>
    async Task IHostedService.StopAsync(CancellationToken cancel)
    {
        await _stop.CancelAsync();
        await SaveAsync("stopping");
    }

    int _disposed;

    /// <summary>Stops the interval saves; safe twice (the container disposes it as itself and as a hosted service).</summary>
    public async ValueTask DisposeAsync()
    {
        if (Interlocked.Exchange(ref _disposed, 1) != 0) return;
        await _stop.CancelAsync();
        if (_loop is not null) await _loop;
        _stop.Dispose();
    }
}
