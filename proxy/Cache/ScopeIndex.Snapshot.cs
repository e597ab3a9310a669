using System.Numerics;
using System.Runtime.InteropServices;

namespace RewriteProxy.Cache;

/// <summary>
/// One scope's part of an index snapshot. <see cref="Freeze"/> takes a view of the rows and the graph as they are, in
/// the time it takes to copy the ids; the scope then goes on changing while the view is written: a row chunk about
/// to be overwritten is copied first (copy on write), and graph changes wait in a queue until <see cref="Thaw"/>. So
/// writers are held off for milliseconds, not for the seconds a million rows take to write.
/// </summary>
internal sealed partial class ScopeIndex
{
    private Frozen? _frozen;

    /// <summary>A view of the rows and graph at one moment (writer only: the caller holds off other writers).</summary>
    public Frozen Freeze()
    {
        if (_frozen is not null) throw new InvalidOperationException($"scope {Name} is already frozen");
        _frozen = new Frozen(Name, _dimensions, _count, _ids.AsSpan(0, _count).ToArray(), [.. _chunks], _graph);
        return _frozen;
    }

    /// <summary>Ends the view (writer only): the graph changes queued meanwhile are applied, in order.</summary>
    public void Thaw()
    {
        var frozen = _frozen;
        _frozen = null;
        // A graph dropped or replaced meanwhile has nothing to catch up: a new one is built from the rows.
        if (frozen?.Graph is not { } graph || !ReferenceEquals(graph, _graph)) return;
        _gate.EnterReadLock();
        try
        {
            foreach (var (id, vector) in frozen.GraphChanges)
            {
                if (vector is null) graph.Remove(id);
                else graph.Add(id, vector);
            }
        }
        finally { _gate.ExitReadLock(); }
    }

    /// <summary>True when the graph insert is queued for <see cref="Thaw"/> instead: the frozen graph is being saved.</summary>
    private bool DeferredAdd(ScopeGraph graph, long id, ReadOnlySpan<float> vector)
    {
        if (_frozen is null || !ReferenceEquals(_frozen.Graph, graph)) return false;
        _frozen.GraphChanges.Add((id, vector.ToArray()));
        return true;
    }

    /// <summary>True when the graph removal is queued for <see cref="Thaw"/> instead.</summary>
    private bool DeferredRemove(ScopeGraph graph, long id)
    {
        if (_frozen is null || !ReferenceEquals(_frozen.Graph, graph)) return false;
        _frozen.GraphChanges.Add((id, null));
        return true;
    }

    /// <summary>Chunk <paramref name="chunk"/>, copied first if a frozen view still reads it (under the write lock).</summary>
    private float[] Writable(int chunk)
    {
        var current = _chunks[chunk];
        if (_frozen is null || !_frozen.Shares(current)) return current;
        var copy = (float[])current.Clone();
        _chunks[chunk] = copy;
        return copy;
    }

    private Span<float> WritableRow(int row) => Writable(row / ChunkRows).AsSpan((row % ChunkRows) * _dimensions, _dimensions);

    /// <summary>The ids of the rows, in row order (a copy; writer only).</summary>
    public long[] Ids() => _ids.AsSpan(0, _count).ToArray();

    /// <summary>A scope's rows and graph as they were at <see cref="Freeze"/>.</summary>
    public sealed class Frozen(string name, int dimensions, int count, long[] ids, float[][] chunks, ScopeGraph? graph)
    {
        private readonly HashSet<float[]> _chunks = new(chunks, ReferenceEqualityComparer.Instance);

        public string Name { get; } = name;

        public int Count { get; } = count;

        /// <summary>The graph, unchanged until thawed (its changes wait in <see cref="GraphChanges"/>).</summary>
        public ScopeGraph? Graph { get; } = graph;

        internal List<(long Id, float[]? Vector)> GraphChanges { get; } = [];

        internal bool Shares(float[] chunk) => _chunks.Contains(chunk);

        /// <summary>Writes the ids (<c>long</c> each), then the vectors (<c>float</c> × dimensions each), in row order, little-endian.</summary>
        public void WriteRows(Stream output)
        {
            output.Write(MemoryMarshal.AsBytes(ids.AsSpan()));
            for (var c = 0; c < chunks.Length; c++)
            {
                var rows = Math.Min(ChunkRows, Count - c * ChunkRows);
                if (rows <= 0) break;
                output.Write(MemoryMarshal.AsBytes(chunks[c].AsSpan(0, rows * dimensions)));
            }
        }
    }

    /// <summary>
    /// A scope rebuilt from a snapshot: the rows in their saved order (so equal similarities come out in the same
    /// order), and the saved graph, if any. Not yet published: the caller owns it.
    /// </summary>
    /// <param name="name">The scope key.</param>
    /// <param name="dimensions">Length of every vector.</param>
    /// <param name="count">Rows in the scope.</param>
    /// <param name="rows">Reads rows into the given id and vector spans, a chunk at a time.</param>
    /// <param name="graph">The scope's saved graph, which the scope now owns (disposed with it, also when this throws).</param>
    /// <exception cref="FormatException">an id appears twice.</exception>
    public static ScopeIndex FromRows(string name, int dimensions, int count, RowSource rows, ScopeGraph? graph)
    {
        var scope = new ScopeIndex(name, dimensions) { _graph = graph };
        try
        {
            scope._ids = new long[Math.Max(count, 16)];
            scope._rowOf.EnsureCapacity(count);
            for (var first = 0; first < count; first += ChunkRows)
            {
                var n = Math.Min(ChunkRows, count - first);
                // The first chunk grows from 8 rows by doubling, as AppendRow grows it, so small scopes stay small.
                var chunk = new float[(first == 0 ? (int)Math.Min(ChunkRows, BitOperations.RoundUpToPowerOf2((uint)Math.Max(n, 8))) : ChunkRows) * dimensions];
                rows(first, n, scope._ids.AsSpan(first, n), chunk.AsSpan(0, n * dimensions));
                scope._chunks.Add(chunk);
            }
            for (var row = 0; row < count; row++)
                if (!scope._rowOf.TryAdd(scope._ids[row], row)) throw new FormatException($"entry {scope._ids[row]} appears twice in scope {name}");
            scope._count = count;
            return scope;
        }
        catch
        {
            scope.Dispose();
            throw;
        }
    }

    /// <summary>Fills <paramref name="ids"/> and <paramref name="vectors"/> with <paramref name="count"/> rows from row <paramref name="first"/>.</summary>
    public delegate void RowSource(int first, int count, Span<long> ids, Span<float> vectors);
}
