using System.Collections.Concurrent;

namespace RewriteProxy.Cache;

/// <summary>
/// In-memory index of the cache's question vectors, partitioned by scope. A lookup only ever sees one scope.
/// Small scopes are searched exactly (brute force); a scope that reaches <see cref="SwitchSize"/> entries gets an
/// HNSW graph as well, whose candidates are reranked exactly.
/// </summary>
/// <remarks>
/// Vectors must be L2-normalised (the embedder's output), so similarity is the dot product.
/// Thread safety: any number of concurrent <see cref="Search"/> calls; writers (<see cref="Add"/>,
/// <see cref="Remove"/>, <see cref="Load"/>, <see cref="Clear"/>) are serialised among themselves and hold a
/// scope's write lock only for a row copy, so a reader waits at most for one row copy plus one in-flight scan.
/// A scope's conversion to a graph runs on the writer's thread: other writers wait for it, readers do not.
/// </remarks>
public sealed partial class VectorIndex : IDisposable
{
    /// <summary>Entries per scope at which a graph is built. Chosen from the exact-vs-HNSW lookup and build
    /// measurements in docs/measurements/index.md: below it brute force is fast enough and needs no build.</summary>
    public const int DefaultSwitchSize = 10_000;

    private readonly ConcurrentDictionary<string, ScopeIndex> _scopes = new(StringComparer.Ordinal);
    private readonly Dictionary<long, ScopeIndex> _scopeOf = [];
    private readonly Lock _writer = new();
    private int _count;
    private bool _disposed;

    /// <param name="dimensions">Length of every vector: the embedder's <c>Dimension</c>, whichever model is loaded.</param>
    /// <param name="switchSize">Entries at which a scope is given a graph; it drops the graph again below half
    /// of this, so a scope hovering at the boundary does not rebuild on every add/remove.</param>
    /// <param name="hnsw">Graph tuning; null for the measured defaults.</param>
    public VectorIndex(int dimensions, int switchSize = DefaultSwitchSize, HnswSettings? hnsw = null)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(switchSize, 2);
        ArgumentOutOfRangeException.ThrowIfLessThan(dimensions, 1);
        SwitchSize = switchSize;
        Dimensions = dimensions;
        Hnsw = hnsw ?? new HnswSettings();
    }

    public int SwitchSize { get; }

    public int Dimensions { get; }

    public HnswSettings Hnsw { get; }

    /// <summary>Entries in all scopes.</summary>
    public int Count => Volatile.Read(ref _count);

    /// <summary>Entries in one scope (0 when the scope is unknown).</summary>
    public int CountOf(string scope) => _scopes.TryGetValue(scope, out var s) ? s.Count : 0;

    /// <summary>True when the scope is currently searched through a graph (for tests and metrics).</summary>
    internal bool UsesGraph(string scope) => _scopes.TryGetValue(scope, out var s) && s.HasGraph;

    /// <summary>
    /// Adds an entry's question vector; an id already present (in any scope) is replaced. The same id with the same
    /// vector in the same scope is left as it is: a process indexes its own entry at once and the change follower
    /// applies the same change again, which would otherwise remove and re-insert it (in a graph scope, twice the graph work).
    /// </summary>
    public void Add(string scope, long id, float[] vector)
    {
        ArgumentNullException.ThrowIfNull(scope);
        CheckVector(vector);
        lock (_writer)
        {
            ObjectDisposedException.ThrowIf(_disposed, this);
            if (_scopeOf.TryGetValue(id, out var current) && current.Name == scope && current.Holds(id, vector)) return;
            RemoveLocked(id);
            var target = _scopes.GetOrAdd(scope, _ => new ScopeIndex(scope, Dimensions));
            target.Add(id, vector);
            _scopeOf[id] = target;
            _count++;
            if (!target.HasGraph && target.Count >= SwitchSize) target.BuildGraph(Hnsw);
        }
    }

    /// <summary>Removes an entry by id; false when it was not indexed.</summary>
    public bool Remove(long id)
    {
        lock (_writer)
        {
            return !_disposed && RemoveLocked(id);
        }
    }

    /// <summary>
    /// Up to <paramref name="k"/> entries of <paramref name="scope"/> with similarity ≥ <paramref name="minSimilarity"/>,
    /// most similar first. Similarities are exact dot products of the stored vectors with the query.
    /// </summary>
    public IReadOnlyList<(long Id, float Similarity)> Search(string scope, ReadOnlySpan<float> query, int k, float minSimilarity)
    {
        ArgumentNullException.ThrowIfNull(scope);
        ArgumentOutOfRangeException.ThrowIfLessThan(k, 1);
        if (query.Length != Dimensions)
            throw new ArgumentException($"Query has {query.Length} dimensions, the index {Dimensions}.", nameof(query));
        if (!_scopes.TryGetValue(scope, out var target)) return [];
        var top = new TopK(k);
        target.Search(query, k, minSimilarity, top, Hnsw.RerankCandidates);
        return top.ToList();
    }

    /// <summary>Removes every entry.</summary>
    public void Clear()
    {
        lock (_writer)
        {
            foreach (var scope in _scopes.Values) scope.Dispose();
            _scopes.Clear();
            _scopeOf.Clear();
            _count = 0;
        }
    }

    /// <summary>
    /// Bulk start-up load (the store passes all rows). Scopes new to the index are built off to the side and
    /// published whole, with one bulk graph build for large ones; rows for scopes already present are added one by
    /// one. A repeated id keeps its last row.
    /// </summary>
    public void Load(IEnumerable<(string scope, long id, float[] vector)> rows)
    {
        ArgumentNullException.ThrowIfNull(rows);
        var last = new Dictionary<long, (string Scope, float[] Vector)>();
        foreach (var (scope, id, vector) in rows)
        {
            ArgumentNullException.ThrowIfNull(scope);
            CheckVector(vector);
            last[id] = (scope, vector);
        }

        lock (_writer)
        {
            ObjectDisposedException.ThrowIf(_disposed, this);
            foreach (var group in last.GroupBy(r => r.Value.Scope, StringComparer.Ordinal))
            {
                var fresh = !_scopes.ContainsKey(group.Key) && group.All(r => !_scopeOf.ContainsKey(r.Key));
                if (!fresh)
                {
                    foreach (var r in group)
                    {
                        RemoveLocked(r.Key);
                        var target = _scopes.GetOrAdd(group.Key, _ => new ScopeIndex(group.Key, Dimensions));
                        target.Add(r.Key, r.Value.Vector);
                        _scopeOf[r.Key] = target;
                        _count++;
                    }
                    if (_scopes.TryGetValue(group.Key, out var grown) && !grown.HasGraph && grown.Count >= SwitchSize)
                        grown.BuildGraph(Hnsw);
                    continue;
                }

                var scope = new ScopeIndex(group.Key, Dimensions);
                var list = group.Select(r => (r.Key, r.Value.Vector)).ToList();
                scope.AddRange(list);
                if (scope.Count >= SwitchSize) scope.BuildGraph(Hnsw);
                foreach (var (id, _) in list) _scopeOf[id] = scope;
                _count += list.Count;
                _scopes[group.Key] = scope;
            }
        }
    }

    private bool RemoveLocked(long id)
    {
        if (!_scopeOf.Remove(id, out var scope)) return false;
        scope.Remove(id);
        _count--;
        if (scope.Count == 0)
        {
            // Unpublish first: a reader that already holds the scope sees it disposed and returns nothing.
            _scopes.TryRemove(new KeyValuePair<string, ScopeIndex>(scope.Name, scope));
            scope.Dispose();
        }
        else if (scope.HasGraph && scope.Count < SwitchSize / 2)
        {
            scope.DropGraph();
        }
        return true;
    }

    private void CheckVector(float[] vector)
    {
        ArgumentNullException.ThrowIfNull(vector);
        if (vector.Length != Dimensions)
            throw new ArgumentException($"Vector has {vector.Length} dimensions, the index {Dimensions}.", nameof(vector));
    }

    public void Dispose()
    {
        lock (_writer)
        {
            if (_disposed) return;
            _disposed = true;
        }
        Clear();
    }
}
