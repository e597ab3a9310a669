using System.Diagnostics;
using RewriteProxy.Store;

namespace RewriteProxy.Cache;

/// <summary>How a wait on another process's claim ended (the <c>result</c> label of <c>rewriteproxy_claim_waits_total</c>).</summary>
public enum ClaimOutcome
{
    /// <summary>The holder stored its entry, and it was served.</summary>
    Served,
    /// <summary>The holder let go without an entry (an upstream error, every rewrite dropped, a crash whose claim lapsed).</summary>
    Released,
    /// <summary>The wait reached <c>Store:ClaimWait</c> first.</summary>
    TimedOut,
}

/// <summary>The end of a wait on another process's claim: the entry it stored when <see cref="ClaimOutcome.Served"/>.</summary>
public sealed record ClaimWait(ClaimOutcome Outcome, StoredEntry? Entry);

/// <summary>
/// Single flight across processes that share a store: the first process to miss a question claims it in the store and
/// asks upstream; the others wait for its entry, woken by the store's change signal and polling besides, and ask upstream
/// themselves when the holder lets go without one or the wait runs out. Within one process the lane flow's coalescer
/// already joins identical misses, so at most one caller per process waits here.
/// </summary>
public sealed class MissClaims(IRewriteStore store, Func<CacheKey, CancellationToken, ValueTask<StoredEntry?>> findExact)
{
    /// <summary>
    /// Longest pause between two looks at a claim without a signal. A notification normally wakes the waiter first; the poll
    /// bounds the delay when it is lost, at two indexed reads per waiting process per tick.
    /// </summary>
    public static readonly TimeSpan PollEvery = TimeSpan.FromMilliseconds(100);

    /// <exception cref="CacheFailure">the store failed.</exception>
    public async Task<bool> ClaimAsync(CacheKey key, TimeSpan hold, CancellationToken cancel)
    {
        try
        {
            return await store.ClaimMissAsync(key.ScopeKey, key.Normalized, hold, cancel);
        }
        catch (StoreException e)
        {
            throw new CacheFailure(FailOpenReason.Store, e.Message, e);
        }
    }

    /// <summary>Lets go of this process's claim. Never throws: an unreleased claim lapses when its hold runs out.</summary>
    public async Task ReleaseAsync(CacheKey key)
    {
        try
        {
            await store.ReleaseMissAsync(key.ScopeKey, key.Normalized, CancellationToken.None);
        }
        catch (StoreException)
        {
            // The claim lapses by itself; the waiters' own bound covers the time until then.
        }
    }

    /// <summary>Waits at most <paramref name="wait"/> for the entry of another process's claim.</summary>
    /// <exception cref="CacheFailure">the store failed.</exception>
    public async Task<ClaimWait> AwaitAsync(CacheKey key, TimeSpan wait, CancellationToken cancel)
    {
        var watch = Stopwatch.StartNew();
        using var signal = new SemaphoreSlim(0);
        void Wake()
        {
            if (signal.CurrentCount == 0) signal.Release();
        }
        store.ChangesAvailable += Wake;
        try
        {
            while (true)
            {
                if (await findExact(key, cancel) is { } entry) return new ClaimWait(ClaimOutcome.Served, entry);
                bool claimed;
                try
                {
                    claimed = await store.IsClaimedAsync(key.ScopeKey, key.Normalized, cancel);
                }
                catch (StoreException e)
                {
                    throw new CacheFailure(FailOpenReason.Store, e.Message, e);
                }
                // Released between the two reads: the entry, if any, is committed by now.
                if (!claimed)
                    return await findExact(key, cancel) is { } stored
                        ? new ClaimWait(ClaimOutcome.Served, stored)
                        : new ClaimWait(ClaimOutcome.Released, null);
                var left = wait - watch.Elapsed;
                if (left <= TimeSpan.Zero) return new ClaimWait(ClaimOutcome.TimedOut, null);
                await signal.WaitAsync(left < PollEvery ? left : PollEvery, cancel);
            }
        }
        finally
        {
            store.ChangesAvailable -= Wake;
        }
    }
}
