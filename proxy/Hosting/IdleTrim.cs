using System.Diagnostics;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Hosting;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Hosting;

/// <summary>
/// Gives back the memory a burst left behind, once the proxy is idle. The GC keeps the memory it committed for a burst
/// (ten rounds of 300 new streams at once: +95 MB, measured) although little of it is live afterwards; one compacting
/// collection, which also returns glibc's free pages, gives most of it back (357 → 281 MB in 44 ms,
/// docs/measurements/performance.md §8). It blocks every thread while it runs, so it runs only when no
/// request has been in flight for <see cref="LimitsOptions.IdleTrimAfter"/>, at most once per idle spell, and only
/// when the resident size grew by <see cref="MinGrowthBytes"/> since the last one. A request that arrives during it waits
/// for it.
/// </summary>
public sealed class IdleTrim(RewriteProxyOptions options, ILogger<IdleTrim> log) : BackgroundService
{
    /// <summary>Less growth than this is not worth a full blocking collection.</summary>
    public const long MinGrowthBytes = 16L << 20;

    /// <summary>How often idleness is checked; the trim comes at most this much later than the idle time.</summary>
    static readonly TimeSpan Tick = TimeSpan.FromSeconds(1);

    readonly TimeSpan _idleAfter = options.Limits.IdleTrimAfter;
    long _inFlight;
    long _started;

    /// <summary>Requests started since the process started.</summary>
    public long Started => Volatile.Read(ref _started);

    /// <summary>Requests started and not yet finished.</summary>
    public long InFlight => Volatile.Read(ref _inFlight);

    /// <summary>Middleware: counts requests, started and in flight (a stream is in flight until its last byte).</summary>
    public async Task TrackAsync(HttpContext context, RequestDelegate next)
    {
        Interlocked.Increment(ref _started);
        Interlocked.Increment(ref _inFlight);
        try
        {
            await next(context);
        }
        finally
        {
            Interlocked.Decrement(ref _inFlight);
        }
    }

    protected override async Task ExecuteAsync(CancellationToken stoppingToken)
    {
        if (_idleAfter <= TimeSpan.Zero) return;
        var clock = new IdleClock(_idleAfter, MinGrowthBytes, Environment.WorkingSet);
        using var timer = new PeriodicTimer(Tick);
        try
        {
            while (await timer.WaitForNextTickAsync(stoppingToken))
            {
                var before = Environment.WorkingSet;
                if (!clock.ShouldTrim(Stopwatch.GetElapsedTime(0), Started, InFlight, before)) continue;
                var start = Stopwatch.GetTimestamp();
                HeapCompaction.Now();
                var after = Environment.WorkingSet;
                clock.Trimmed(after);
                log.LogInformation("Idle for {IdleSeconds:0.#} s: memory given back, VmRSS {Before} -> {After} MB in {Milliseconds:0} ms",
                    _idleAfter.TotalSeconds, before >> 20, after >> 20, Stopwatch.GetElapsedTime(start).TotalMilliseconds);
            }
        }
        catch (OperationCanceledException) when (stoppingToken.IsCancellationRequested)
        {
            // stopping
        }
    }
}

/// <summary>
/// When <see cref="IdleTrim"/> trims: no request in flight or started for the idle time (counted from the last check
/// that saw one), requests served since the last trim, and the resident size grown by the minimum over what that trim
/// left. Kept apart so that the rule is tested on its own.
/// </summary>
public sealed class IdleClock(TimeSpan idleAfter, long minGrowthBytes, long residentAtStart)
{
    long _seenStarted;
    TimeSpan _quietSince;
    long _startedAtTrim;
    long _residentAfterTrim = residentAtStart;

    /// <param name="now">a monotonic time</param>
    /// <param name="started">requests started so far</param>
    /// <param name="inFlight">requests not yet finished</param>
    /// <param name="resident">the process's resident bytes now</param>
    public bool ShouldTrim(TimeSpan now, long started, long inFlight, long resident)
    {
        if (started != _seenStarted || inFlight > 0)
        {
            _seenStarted = started;
            _quietSince = now;
            return false;
        }
        return now - _quietSince >= idleAfter && started != _startedAtTrim && resident - _residentAfterTrim >= minGrowthBytes;
    }

    /// <summary>Records a trim: the next one needs new requests and new growth over <paramref name="resident"/>.</summary>
    public void Trimmed(long resident)
    {
        _startedAtTrim = _seenStarted;
        _residentAfterTrim = resident;
    }
}
