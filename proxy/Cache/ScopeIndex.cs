using System.Numerics.Tensors;

namespace RewriteProxy.Cache;

/// <summary>
/// The question vectors of one scope: an exact row store (always kept: it answers small scopes by brute force,
/// reranks graph candidates with full-precision similarities and is the source for building the graph) plus,
/// once the scope is large, an HNSW graph over the same rows.
/// </summary>
/// <remarks>
/// Concurrency: readers take <see cref="_gate"/> for reading; the row store changes only under the write lock.
/// All writers are serialised by the owning <see cref="VectorIndex"/>, so a writer may read the rows without the
/// lock and may talk to the graph under the read lock (the graph handles its own concurrent insert/search).
/// </remarks>
internal sealed partial class ScopeIndex : IDisposable
{
    /// <summary>Rows per storage chunk: 4096 × 384 floats = 6 MiB, small enough to stay cheap to allocate,
    /// large enough that a scan is a handful of long contiguous runs.</summary>
    internal const int ChunkRows = 4096;

    private readonly int _dimensions;
    private readonly ReaderWriterLockSlim _gate = new(LockRecursionPolicy.NoRecursion);
    private readonly List<float[]> _chunks = [];
    private long[] _ids = new long[16];
    private readonly Dictionary<long, int> _rowOf = [];
    private ScopeGraph? _graph;
    private int _count;
    private bool _disposed;

    public ScopeIndex(string name, int dimensions)
    {
        Name = name;
        _dimensions = dimensions;
    }

    public string Name { get; }

    public int Count => Volatile.Read(ref _count);

    public bool HasGraph => Volatile.Read(ref _graph) is not null;

    public bool Contains(long id)
    {
        _gate.EnterReadLock();
        try { return _rowOf.ContainsKey(id); }
        finally { _gate.ExitReadLock(); }
    }

    /// <summary>True when <paramref name="id"/> is here with exactly <paramref name="vector"/> (writer only: rows change only
    /// under the writer, so it reads them without the lock).</summary>
    public bool Holds(long id, ReadOnlySpan<float> vector)
    {
        if (!_rowOf.TryGetValue(id, out var row)) return false;
        var offset = (row % ChunkRows) * _dimensions;
        return _chunks[row / ChunkRows].AsSpan(offset, _dimensions).SequenceEqual(vector);
    }

    /// <summary>Appends a row (writer only). The graph, if any, is updated after the row is visible.</summary>
    public void Add(long id, ReadOnlySpan<float> vector)
    {
        _gate.EnterWriteLock();
        try { AppendRow(id, vector); }
        finally { _gate.ExitWriteLock(); }

        if (_graph is { } graph && !DeferredAdd(graph, id, vector))
        {
            _gate.EnterReadLock();
            try { graph.Add(id, vector); }
            finally { _gate.ExitReadLock(); }
        }
    }

    /// <summary>Appends many rows at once (writer only, used at start-up before the scope is published).</summary>
    public void AddRange(IReadOnlyList<(long Id, float[] Vector)> rows)
    {
        _gate.EnterWriteLock();
        try
        {
            foreach (var (id, vector) in rows) AppendRow(id, vector);
        }
        finally { _gate.ExitWriteLock(); }
    }

    /// <summary>Swap-removes a row (writer only): the last row moves into the hole so the rows stay dense.</summary>
    public bool Remove(long id)
    {
        ScopeGraph? graph;
        _gate.EnterWriteLock();
        try
        {
            if (!_rowOf.Remove(id, out var row)) return false;
            var last = _count - 1;
            if (row != last)
            {
                RowSpan(last).CopyTo(WritableRow(row));
                _ids[row] = _ids[last];
                _rowOf[_ids[row]] = row;
            }
            _count = last;
            while (_chunks.Count > 1 && (_chunks.Count - 1) * ChunkRows >= _count) _chunks.RemoveAt(_chunks.Count - 1);
            graph = _graph;
        }
        finally { _gate.ExitWriteLock(); }

        // Search drops graph hits whose id has no row, so the short window before this line returns nothing stale.
        if (graph is not null && !DeferredRemove(graph, id))
        {
            _gate.EnterReadLock();
            try { graph.Remove(id); }
            finally { _gate.ExitReadLock(); }
        }
        return true;
    }

    /// <summary>Builds a graph over the current rows and switches the scope to it (writer only).</summary>
    public void BuildGraph(HnswSettings settings)
    {
        if (_graph is not null) return;
        // Rows cannot change while we build: every writer is serialised by the owner, and we are the writer.
        var graph = new ScopeGraph(_dimensions, settings, Math.Max(_count, 1));
        try
        {
            graph.AddMany(_count, i => (_ids[i], RowSpan(i).ToArray()));
        }
        catch
        {
            graph.Dispose();
            throw;
        }
        _gate.EnterWriteLock();
        try { Volatile.Write(ref _graph, graph); }
        finally { _gate.ExitWriteLock(); }
    }

    /// <summary>Drops the graph (writer only) when the scope has shrunk back to brute-force size.</summary>
    public void DropGraph()
    {
        ScopeGraph? graph;
        _gate.EnterWriteLock();
        try
        {
            graph = _graph;
            Volatile.Write(ref _graph, null);
        }
        finally { _gate.ExitWriteLock(); }
        graph?.Dispose();
    }

    public void Search(ReadOnlySpan<float> query, int k, float minSimilarity, TopK top, int graphCandidates)
    {
        _gate.EnterReadLock();
        try
        {
            if (_disposed || _count == 0) return;
            if (_graph is { } graph) SearchGraph(graph, query, minSimilarity, top, Math.Max(k, graphCandidates));
            else SearchExact(query, minSimilarity, top);
        }
        finally { _gate.ExitReadLock(); }
    }

    /// <summary>Brute force: one SIMD dot product per row over contiguous chunks.</summary>
    private void SearchExact(ReadOnlySpan<float> query, float minSimilarity, TopK top)
    {
        for (var c = 0; c < _chunks.Count; c++)
        {
            var first = c * ChunkRows;
            var rows = Math.Min(ChunkRows, _count - first);
            if (rows <= 0) break;
            var chunk = _chunks[c].AsSpan(0, rows * _dimensions);
            for (var r = 0; r < rows; r++)
            {
                var similarity = TensorPrimitives.Dot(chunk.Slice(r * _dimensions, _dimensions), query);
                if (similarity >= minSimilarity) top.Offer(_ids[first + r], similarity);
            }
        }
    }

    /// <summary>Graph candidates, reranked with the exact full-precision rows (the graph may hold reduced
    /// precision, and a removed id still in the graph has no row and is skipped).</summary>
    private void SearchGraph(ScopeGraph graph, ReadOnlySpan<float> query, float minSimilarity, TopK top, int candidates)
    {
        var ids = graph.Search(query, candidates);
        foreach (var key in ids)
        {
            var id = (long)key;
            if (!_rowOf.TryGetValue(id, out var row)) continue;
            var similarity = TensorPrimitives.Dot(RowSpan(row), query);
            if (similarity >= minSimilarity) top.Offer(id, similarity);
        }
    }

    private void AppendRow(long id, ReadOnlySpan<float> vector)
    {
        var row = _count;
        var chunkIndex = row / ChunkRows;
        var offset = (row % ChunkRows) * _dimensions;
        if (chunkIndex == _chunks.Count)
        {
            // A new scope starts with a small chunk that doubles up to ChunkRows, so the many tiny scopes stay tiny.
            _chunks.Add(new float[(chunkIndex == 0 ? 8 : ChunkRows) * _dimensions]);
        }
        var chunk = Writable(chunkIndex);
        if (offset + _dimensions > chunk.Length)
        {
            Array.Resize(ref chunk, Math.Min(chunk.Length * 2, ChunkRows * _dimensions));
            _chunks[chunkIndex] = chunk;
        }
        vector.CopyTo(chunk.AsSpan(offset, _dimensions));
        if (row == _ids.Length) Array.Resize(ref _ids, _ids.Length * 2);
        _ids[row] = id;
        _rowOf[id] = row;
        _count = row + 1;
    }

    private Span<float> RowSpan(int row) =>
        _chunks[row / ChunkRows].AsSpan((row % ChunkRows) * _dimensions, _dimensions);

    /// <summary>Approximate bytes held by the rows (not the graph): for the memory figures in the notes.</summary>
    public long RowBytes
    {
        get
        {
            _gate.EnterReadLock();
            try { return _chunks.Sum(c => (long)c.Length * sizeof(float)) + _ids.Length * sizeof(long); }
            finally { _gate.ExitReadLock(); }
        }
    }

    public void Dispose()
    {
        ScopeGraph? graph;
        _gate.EnterWriteLock();
        try
        {
            _disposed = true;
            graph = _graph;
            _graph = null;
            _chunks.Clear();
            _rowOf.Clear();
            _count = 0;
        }
        finally { _gate.ExitWriteLock(); }
        graph?.Dispose();
    }
}

/// <summary>The k best (id, similarity) pairs seen so far, best first; k is small so insertion is linear.</summary>
internal sealed class TopK
{
    private readonly (long Id, float Similarity)[] _items;
    private int _count;

    public TopK(int k) => _items = new (long, float)[k];

    public void Offer(long id, float similarity)
    {
        if (_count == _items.Length && similarity <= _items[_count - 1].Similarity) return;
        var i = _count < _items.Length ? _count++ : _count - 1;
        while (i > 0 && _items[i - 1].Similarity < similarity)
        {
            _items[i] = _items[i - 1];
            i--;
        }
        _items[i] = (id, similarity);
    }

    public IReadOnlyList<(long Id, float Similarity)> ToList() => _items.AsSpan(0, _count).ToArray();
}
