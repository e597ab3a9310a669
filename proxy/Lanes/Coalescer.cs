using System.Collections.Concurrent;

namespace RewriteProxy.Lanes;

/// <summary>
/// Concurrent identical misses share one upstream call: the first caller runs it, the others await its outcome.
/// The entry leaves the table when the call ends, so a later miss starts afresh.
/// </summary>
public sealed class Coalescer<T>
{
    readonly ConcurrentDictionary<string, Lazy<Task<T>>> _inFlight = new(StringComparer.Ordinal);

    /// <summary>Runs <paramref name="work"/> once per key at a time; <paramref name="joined"/> tells the caller it waited on another's call.</summary>
    public Task<T> RunAsync(string key, Func<Task<T>> work, out bool joined)
    {
        var mine = new Lazy<Task<T>>(() => RunAndForget(key, work), LazyThreadSafetyMode.ExecutionAndPublication);
        var winner = _inFlight.GetOrAdd(key, mine);
        joined = !ReferenceEquals(winner, mine);
        return winner.Value;
    }

    async Task<T> RunAndForget(string key, Func<Task<T>> work)
    {
        try
        {
            return await work();
        }
        finally
        {
            _inFlight.TryRemove(key, out _);
        }
    }

    public int InFlight => _inFlight.Count;
}
