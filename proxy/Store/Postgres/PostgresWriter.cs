using System.Collections.Concurrent;
using System.Threading.Channels;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Store.Postgres;

/// <summary>
/// The background writer of hits, tallies, events and templates: never awaited by a response. Hits and tallies add
/// up in memory and are written once per batch; events and templates wait in a bounded queue, beyond which they are
/// dropped and counted. While the database is down everything waits (bounded) and is retried; a batch the database
/// refuses for its content is dropped (counted), so one bad row cannot block the rest for ever. Also runs the sweep.
/// </summary>
public sealed class PostgresWriter : IAsyncDisposable
{
    /// <summary>Most events and templates waiting, and most entries with hits not yet written; beyond it they are dropped, never requests.</summary>
    public const int QueueCapacity = 16_384;

    /// <summary>Most events or templates in one transaction: large enough to amortise the commit, small enough to keep it short.</summary>
    public const int BatchSize = 512;

    /// <summary>How often expiry, eviction and retention run (by whichever replica gets the sweep lock).</summary>
    public static readonly TimeSpan SweepEvery = TimeSpan.FromSeconds(30);

    /// <summary>Longest shutdown wait for queued writes, so a process stops even with the database down.</summary>
    static readonly TimeSpan DisposeWait = TimeSpan.FromSeconds(10);

    readonly PostgresConnector _connector;
    readonly ILogger _log;
    readonly Func<CancellationToken, Task> _sweep;
    readonly Channel<object> _queue = Channel.CreateBounded<object>(new BoundedChannelOptions(QueueCapacity)
    {
        SingleReader = true,
        FullMode = BoundedChannelFullMode.Wait,
    });
    readonly ConcurrentDictionary<long, (long Count, DateTime Last)> _hits = new();
    readonly ConcurrentDictionary<(string Lane, string Name), long> _tallies = new();
    readonly List<EventRow> _events = [];
    readonly List<TemplateRow> _templates = [];
    readonly List<TaskCompletionSource> _barriers = [];
    readonly CancellationTokenSource _stop = new();
    readonly Task _loop;
    long _dropped;
    long _hitEntries;
    int _pendingWake;
    bool _failing;
    long _retryAt;
    DateTimeOffset _nextSweep = DateTimeOffset.UtcNow + SweepEvery;

    public PostgresWriter(PostgresConnector connector, ILogger log, Func<CancellationToken, Task> sweep)
    {
        _connector = connector;
        _log = log;
        _sweep = sweep;
        _loop = Task.Run(LoopAsync);
    }

    /// <summary>Writes dropped because a queue was full, or because the database refused them.</summary>
    public long Dropped => Interlocked.Read(ref _dropped);

    public void RecordHit(long id, DateTimeOffset at)
    {
        var last = PostgresValues.Time(at);
        // Entries with hits waiting, counted here and recounted by the writer (ConcurrentDictionary.Count takes every lock).
        if (!_hits.ContainsKey(id) && Interlocked.Increment(ref _hitEntries) > QueueCapacity)
        {
            Interlocked.Increment(ref _dropped);
            return;
        }
        _hits.AddOrUpdate(id, (1, last), (_, v) => (v.Count + 1, v.Last > last ? v.Last : last));
        Wake();
    }

    public void Count(string lane, string name, long by)
    {
        _tallies.AddOrUpdate((lane, name), by, (_, v) => v + by);
        Wake();
    }

    public void Append(EventRow row) => Enqueue(row);

    public void Append(TemplateRow row) => Enqueue(row);

    void Enqueue(object item)
    {
        if (!_queue.Writer.TryWrite(item)) Interlocked.Increment(ref _dropped);
    }

    void Wake()
    {
        if (Interlocked.Exchange(ref _pendingWake, 1) == 0) _queue.Writer.TryWrite(WakeSignal.Instance);
    }

    /// <summary>Completes once everything queued before it is written; throws <see cref="StoreException"/> while the database is down.</summary>
    public async Task FlushAsync(CancellationToken cancel)
    {
        var barrier = new TaskCompletionSource(TaskCreationOptions.RunContinuationsAsynchronously);
        await _queue.Writer.WriteAsync(barrier, cancel);
        await barrier.Task.WaitAsync(cancel);
    }

    bool HasPending => _events.Count > 0 || _templates.Count > 0 || !_hits.IsEmpty || !_tallies.IsEmpty;

    async Task LoopAsync()
    {
        var reader = _queue.Reader;
        while (true)
        {
            // While writes wait for the database, try again after the circuit's first pause; else wake for the sweep.
            var wait = HasPending ? PostgresCircuit.FirstPause : SweepEvery;
            bool open;
            try
            {
                using var tick = CancellationTokenSource.CreateLinkedTokenSource(_stop.Token);
                tick.CancelAfter(wait);
                open = await reader.WaitToReadAsync(tick.Token);
            }
            catch (OperationCanceledException)
            {
                open = !_stop.IsCancellationRequested;
            }
            Drain(reader);
            // While the database is down, pending writes are tried once a pause, not on every arrival; a flush still gets its answer at once.
            if (_barriers.Count > 0 || (HasPending && (!_failing || Environment.TickCount64 >= _retryAt))) await WriteAsync();
            if (!open) break;
            if (DateTimeOffset.UtcNow >= _nextSweep)
            {
                _nextSweep = DateTimeOffset.UtcNow + SweepEvery;
                await SweepAsync();
            }
        }
        if (HasPending)
            _log.LogWarning("store: closed with {Events} events and {Templates} templates not written (the database did not answer)",
                _events.Count, _templates.Count);
        FailBarriers(new StoreException("the store was closed before these writes were made"));
    }

    void Drain(ChannelReader<object> reader)
    {
        while (reader.TryRead(out var item))
        {
            switch (item)
            {
                case EventRow row when _events.Count < QueueCapacity:
                    _events.Add(row);
                    break;
                case TemplateRow row when _templates.Count < QueueCapacity:
                    _templates.Add(row);
                    break;
                case TaskCompletionSource barrier:
                    _barriers.Add(barrier);
                    break;
                case WakeSignal:
                    break;
                default:
                    Interlocked.Increment(ref _dropped);
                    break;
            }
        }
    }

    /// <summary>Writes batches until nothing is pending (then completes the flushes) or the database fails (then they fail).</summary>
    async Task WriteAsync()
    {
        while (HasPending)
        {
            Volatile.Write(ref _pendingWake, 0);
            var batch = PostgresBatch.Take(_hits, _tallies, _events, _templates, BatchSize);
            Interlocked.Exchange(ref _hitEntries, _hits.Count);
            try
            {
                await _connector.RunLongAsync("writing hits, tallies and events", c => batch.WriteAsync(c, _stop.Token), _stop.Token);
                _events.RemoveRange(0, batch.Events.Count);
                _templates.RemoveRange(0, batch.Templates.Count);
                if (_failing) _log.LogInformation("store: background writes resumed at {Location}", _connector.Location);
                _failing = false;
            }
            catch (Exception e) when (e is StoreException or OperationCanceledException)
            {
                var down = e is OperationCanceledException || e.InnerException is null || PostgresConnector.IsConnectionFailure(e.InnerException);
                if (down)
                {
                    batch.PutBack(_hits, _tallies);
                    Interlocked.Exchange(ref _hitEntries, _hits.Count);
                    _retryAt = Environment.TickCount64 + (long)PostgresCircuit.FirstPause.TotalMilliseconds;
                    if (!_failing) _log.LogWarning("store: background writes wait for the database: {Reason}", e.Message);
                    _failing = true;
                    FailBarriers(e as StoreException ?? new StoreException("the store is closing", e));
                    return;
                }
                // The database refused the batch's content: drop it (counted) rather than retry it for ever.
                _events.RemoveRange(0, batch.Events.Count);
                _templates.RemoveRange(0, batch.Templates.Count);
                Interlocked.Add(ref _dropped, batch.Size);
                _log.LogError("store: dropped {Count} background writes the database refused: {Reason}", batch.Size, e.Message);
            }
        }
        foreach (var barrier in _barriers) barrier.TrySetResult();
        _barriers.Clear();
    }

    void FailBarriers(StoreException e)
    {
        foreach (var barrier in _barriers) barrier.TrySetException(e);
        _barriers.Clear();
    }

    async Task SweepAsync()
    {
        try
        {
            await _sweep(_stop.Token);
        }
        catch (Exception e) when (e is StoreException or OperationCanceledException)
        {
            if (!_stop.IsCancellationRequested) _log.LogWarning("store: the sweep failed: {Reason}", e.Message);
        }
    }

    /// <summary>Stops taking writes and writes what is queued, waiting at most <see cref="DisposeWait"/>.</summary>
    public async ValueTask DisposeAsync()
    {
        _queue.Writer.TryComplete();
        try
        {
            await _loop.WaitAsync(DisposeWait);
        }
        catch (TimeoutException)
        {
            _log.LogWarning("store: gave up waiting for queued writes on shutdown");
            await _stop.CancelAsync();
            await _loop.WaitAsync(DisposeWait).ContinueWith(_ => { }, TaskScheduler.Default);
        }
        _stop.Dispose();
    }

    sealed class WakeSignal
    {
        public static readonly WakeSignal Instance = new();
    }
}
