using System.Diagnostics;
using Microsoft.Extensions.Logging;
using RewriteProxy.Store;

namespace RewriteProxy.Cache;

/// <summary>
/// Keeps the vector index and the hot entries in step with the store, whichever store it is: a rebuild from
/// <see cref="IRewriteStore.ReadVectorsAsync"/> (or an index loaded elsewhere, from a sequence), then the store's
/// changes in order, on <see cref="IRewriteStore.ChangesAvailable"/> and on a poll. Applying a change twice is harmless,
/// so this process's own writes, already in the index, are applied again without effect. Never throws into requests:
/// a failed read is logged and tried again on the next poll.
/// </summary>
public sealed class IndexFollower : IAsyncDisposable
{
    /// <summary>
    /// How often the store is asked for changes without a signal. Another process's writes reach this one by the poll
    /// alone when the store cannot notify across processes, and a lost notification (a reconnect) delays a change by at most
    /// this; one indexed read a second is nothing beside the traffic it keeps correct.
    /// </summary>
    public static readonly TimeSpan PollEvery = TimeSpan.FromSeconds(1);

    /// <summary>Changes read per query: enough to catch up quickly after a pause, few enough that one read stays short.</summary>
    public const int BatchLimit = 1_000;

    readonly IRewriteStore _store;
    readonly VectorIndex _index;
    readonly HotEntries _hot;
    readonly string _modelId;
    readonly ILogger _log;
    readonly SemaphoreSlim _wake = new(0, 1);
    readonly SemaphoreSlim _applying = new(1, 1);
    readonly CancellationTokenSource _stop = new();
    Task? _loop;
    long _sequence;
    string? _storeId;
    /// <summary>The index holds the store as of <see cref="Sequence"/> (rebuilt, or given to <see cref="StartAsync"/>).</summary>
    volatile bool _loaded;
    bool _failing;
    /// <summary>Set from the moment a rebuild clears the index until it has loaded the store again.</summary>
    volatile bool _rebuilding;
    long _generation;

    public IndexFollower(IRewriteStore store, VectorIndex index, HotEntries hot, string modelId, ILogger log)
    {
        _store = store;
        _index = index;
        _hot = hot;
        _modelId = modelId;
        _log = log;
        _store.ChangesAvailable += Wake;
    }

    /// <summary>The sequence of the last change applied: the index holds the store as of this change.</summary>
    public long Sequence => Interlocked.Read(ref _sequence);

    /// <summary>True once the index holds the store (the rebuild, or the given index, and its first catch-up).</summary>
    public bool Ready { get; private set; }

    /// <summary>Rises when a rebuild starts: a snapshot saved across a change of it may mix two states of the index.</summary>
    public long Generation => Interlocked.Read(ref _generation);

    /// <summary>
    /// Where the index stands, for a snapshot (Cache/Snapshots): the store it holds, the change it holds it as of, and the
    /// <see cref="Generation"/> to compare once saved. Null before the index holds the store, and during a rebuild.
    /// </summary>
    public IndexPoint? Point()
    {
        // Generation first: a rebuild sets _rebuilding before it raises the generation, so either this sees the flag or
        // the saver sees a new generation afterwards.
        var generation = Generation;
        if (_rebuilding || !_loaded || !Ready || _storeId is not { } storeId) return null;
        return new IndexPoint(generation, storeId, Sequence);
    }

    /// <summary>
    /// Rebuilds the index from the store, off the request path (a million entries take minutes, docs/measurements/index.md;
    /// meanwhile exact lookups work and semantic ones see what is indexed), then follows. Completes once rebuilt.
    /// </summary>
    public async Task StartWithRebuildAsync()
    {
        try
        {
            await CatchUpAsync(rebuild: true, _stop.Token);
        }
        catch (Exception e) when (e is not OperationCanceledException)
        {
            LogFailure(e);
        }
        _loop ??= Task.Run(FollowAsync);
    }

    /// <summary>
    /// Follows from <paramref name="fromSequence"/>, over an index already loaded to that sequence (a snapshot of this
    /// store: the caller checked its <see cref="IRewriteStore.StoreId"/>). Completes after the first catch-up.
    /// </summary>
    public async Task StartAsync(long fromSequence)
    {
        Interlocked.Exchange(ref _sequence, fromSequence);
        _storeId = _store.StoreId;
        _loaded = true;
        try
        {
            await CatchUpAsync(rebuild: false, _stop.Token);
        }
        catch (Exception e) when (e is not OperationCanceledException)
        {
            LogFailure(e);
        }
        _loop ??= Task.Run(FollowAsync);
    }

    void Wake()
    {
        if (_wake.CurrentCount > 0) return;
        try
        {
            _wake.Release();
        }
        catch (SemaphoreFullException)
        {
            // Already signalled.
        }
    }

    async Task FollowAsync()
    {
        while (!_stop.IsCancellationRequested)
        {
            try
            {
                await _wake.WaitAsync(PollEvery, _stop.Token);
                await CatchUpAsync(rebuild: false, _stop.Token);
                if (_failing) _log.LogInformation("cache: the index follows the store again at change {Sequence}", Sequence);
                _failing = false;
            }
            catch (OperationCanceledException) when (_stop.IsCancellationRequested)
            {
                return;
            }
            catch (Exception e)
            {
                LogFailure(e);
            }
        }
    }

    void LogFailure(Exception e)
    {
        // Once per outage, not once a second.
        if (!_failing) _log.LogError("cache: the index cannot follow the store ({Reason}); trying again every {Poll}", e.Message, PollEvery);
        _failing = true;
    }

    /// <summary>Applies every change committed so far (rebuilding first when asked, or when the store forgot or was made anew).</summary>
    public async Task CatchUpAsync(CancellationToken cancel) => await CatchUpAsync(rebuild: false, cancel);

    async Task CatchUpAsync(bool rebuild, CancellationToken cancel)
    {
        await _applying.WaitAsync(cancel);
        try
        {
            // A store made anew under us (its file lost) has another id; its ids mean other entries.
            if (rebuild || !_loaded || _storeId != _store.StoreId) await RebuildAsync(cancel);
            var rebuilt = false;
            while (true)
            {
                var changes = await _store.ChangesAfterAsync(Sequence, BatchLimit, cancel);
                if (changes is null)
                {
                    // Once per catch-up: a store that forgets again at once is tried again on the next poll.
                    if (rebuilt) return;
                    _log.LogWarning("cache: the store no longer holds the changes after {Sequence}; rebuilding the index", Sequence);
                    await RebuildAsync(cancel);
                    rebuilt = true;
                    continue;
                }
                foreach (var change in changes) Apply(change);
                if (changes.Count > 0) Interlocked.Exchange(ref _sequence, changes[^1].Sequence);
                if (changes.Count < BatchLimit) break;
            }
            Ready = true;
        }
        finally
        {
            _applying.Release();
        }
    }

    void Apply(StoreChange change)
    {
        _hot.Invalidate(change.EntryId);
        if (change is { Kind: ChangeKind.Put, Vector: { } vector, ScopeKey: { } scope } && change.ModelId == _modelId
            && vector.Length == _index.Dimensions)
            _index.Add(scope, change.EntryId, vector);
        else
            _index.Remove(change.EntryId); // deleted, stored without a vector, or by another embedding model
    }

    async Task RebuildAsync(CancellationToken cancel)
    {
        var watch = Stopwatch.StartNew();
        var storeId = _store.StoreId;
        var load = await _store.ReadVectorsAsync(_modelId, cancel);
        // Left set if what follows fails: an index half cleared must never be saved.
        _rebuilding = true;
        Interlocked.Increment(ref _generation);
        _index.Clear();
        _hot.Clear();
        _index.Load(load.Rows.Where(r => r.Vector.Length == _index.Dimensions).Select(r => (r.ScopeKey, r.Id, r.Vector)));
        Interlocked.Exchange(ref _sequence, load.Sequence);
        _storeId = storeId;
        _loaded = true;
        _rebuilding = false;
        _log.LogInformation("cache: index rebuilt with {Count} vectors of model {ModelId} in {Ms} ms (change {Sequence})", _index.Count,
            _modelId, watch.ElapsedMilliseconds, load.Sequence);
    }

    public async ValueTask DisposeAsync()
    {
        _store.ChangesAvailable -= Wake;
        await _stop.CancelAsync();
        if (_loop is not null)
        {
            try
            {
                await _loop;
            }
            catch (OperationCanceledException)
            {
                // Stopped.
            }
        }
        _stop.Dispose();
    }
}

/// <summary>The state an index holds: the store (its id), the change sequence, and the follower's rebuild generation.</summary>
public sealed record IndexPoint(long Generation, string StoreId, long Sequence);
