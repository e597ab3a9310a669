using System.Diagnostics;

namespace RewriteProxy.Cache;

/// <summary>
/// The index's side of snapshots (<see cref="Snapshots.IndexSnapshotWriter"/>, <see cref="Snapshots.IndexSnapshotReader"/>):
/// scopes handed out one at a time as frozen views, and a whole set of loaded scopes published at once.
/// </summary>
public sealed partial class VectorIndex
{
    /// <summary>
    /// Hands <paramref name="frozen"/> each scope there is now, one at a time, as a view frozen at one moment: rows and
    /// graph consistent with each other. Only taking the view and ending it hold off the index's writers (the ids are
    /// copied; graph changes made meanwhile are applied at the end); writing the view out holds off nobody, and searches
    /// never wait at all. Scopes made after the call began are left out (their entries' changes come after the
    /// snapshot's sequence and are replayed).
    /// </summary>
    /// <param name="frozen">Writes the view out, while the scope goes on changing.</param>
    /// <param name="thawed">Runs after each view has ended: what needs no view (appending a saved graph).</param>
    /// <returns>The longest time writers were held off.</returns>
    internal TimeSpan ForEachScopeFrozen(Action<ScopeIndex.Frozen> frozen, Action thawed)
    {
        var names = _scopes.Keys.ToArray();
        var longest = TimeSpan.Zero;
        void Held(long start)
        {
            var held = Stopwatch.GetElapsedTime(start);
            if (held > longest) longest = held;
        }
        foreach (var name in names)
        {
            ScopeIndex? scope;
            ScopeIndex.Frozen view;
            lock (_writer)
            {
                ObjectDisposedException.ThrowIf(_disposed, this);
                var start = Stopwatch.GetTimestamp();
                if (!_scopes.TryGetValue(name, out scope)) continue;
                view = scope.Freeze();
                Held(start);
            }
            try
            {
                frozen(view);
            }
            finally
            {
                lock (_writer)
                {
                    var start = Stopwatch.GetTimestamp();
                    scope.Thaw();
                    Held(start);
                }
            }
            thawed();
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
