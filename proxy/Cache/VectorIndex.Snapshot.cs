using System.Diagnostics;

namespace RewriteProxy.Cache;

/// <summary>
/// The index's side of snapshots (<see cref="Snapshots.IndexSnapshotWriter"/>, <see cref="Snapshots.IndexSnapshotReader"/>):
/// scopes handed out one at a time with writers held off, and a whole set of loaded scopes published at once.
/// </summary>
public sealed partial class VectorIndex
{
    /// <summary>True while a snapshot holds writers off (one scope's copy).</summary>
    private volatile bool _heldForSnapshot;

    /// <summary>
    /// <see cref="Add"/>, unless a snapshot holds writers off right now: then false at once, and the caller leaves the
    /// entry to the index follower, which applies it from the store's change feed once the hold ends. For the request
    /// path: a miss's answer never waits on a snapshot (at 1M entries a hold lasts seconds, docs/measurements/snapshots.md).
    /// </summary>
    public bool AddUnlessHeld(string scope, long id, float[] vector)
    {
        if (_heldForSnapshot) return false;
        Add(scope, id, vector);
        return true;
    }

    /// <summary><see cref="Remove"/>, unless a snapshot holds writers off right now (false; the follower applies it).</summary>
    public bool RemoveUnlessHeld(long id)
    {
        if (_heldForSnapshot) return false;
        Remove(id);
        return true;
    }
    /// <summary>
    /// Calls <paramref name="held"/> for each scope there is now, one scope at a time, each while holding the writer
    /// lock: the scope's rows and graph cannot change meanwhile, so they are saved consistent with each other. Searches
    /// take no writer lock and go on; writers wait for at most one scope. Scopes made after the call began are left out
    /// (their entries' changes come after the snapshot's sequence and are replayed).
    /// </summary>
    /// <param name="held">Copies what must be consistent, as fast as it can: writers wait for it.</param>
    /// <param name="released">Runs after each <paramref name="held"/>, once the lock is released: the slow rest.</param>
    /// <returns>The longest time writers were held off.</returns>
    internal TimeSpan ForEachScopeHeld(Action<ScopeIndex> held, Action released)
    {
        var names = _scopes.Keys.ToArray();
        var longest = TimeSpan.Zero;
        foreach (var name in names)
        {
            lock (_writer)
            {
                ObjectDisposedException.ThrowIf(_disposed, this);
                var start = Stopwatch.GetTimestamp();
                if (!_scopes.TryGetValue(name, out var scope)) continue;
                _heldForSnapshot = true;
                try
                {
                    held(scope);
                }
                finally
                {
                    _heldForSnapshot = false;
                }
                var hold = Stopwatch.GetElapsedTime(start);
                if (hold > longest) longest = hold;
            }
            released();
        }
        return longest;
    }

    /// <summary>
    /// Replaces everything the index holds with <paramref name="scopes"/> (loaded from a snapshot, with distinct names;
    /// the index now owns them). An id found in two scopes (it moved while the snapshot was being written) is kept in
    /// the last one only: the change that moved it is replayed after the load anyway. Scopes are then given or
    /// relieved of their graph as this index's <see cref="SwitchSize"/> says, in case the snapshot was made with another.
    /// </summary>
    internal void Restore(IReadOnlyList<ScopeIndex> scopes)
    {
        lock (_writer)
        {
            ObjectDisposedException.ThrowIf(_disposed, this);
            foreach (var old in _scopes.Values) old.Dispose();
            _scopes.Clear();
            _scopeOf.Clear();
            _count = 0;
            foreach (var scope in scopes)
            {
                foreach (var id in scope.Ids())
                {
                    if (_scopeOf.Remove(id, out var earlier))
                    {
                        earlier.Remove(id);
                        _count--;
                    }
                    _scopeOf[id] = scope;
                    _count++;
                }
                _scopes[scope.Name] = scope;
            }
            foreach (var scope in _scopes.Values.ToList())
            {
                if (scope.Count == 0)
                {
                    _scopes.TryRemove(scope.Name, out _);
                    scope.Dispose();
                }
                else if (!scope.HasGraph && scope.Count >= SwitchSize) scope.BuildGraph(Hnsw);
                else if (scope.HasGraph && scope.Count < SwitchSize / 2) scope.DropGraph();
            }
        }
    }
}
