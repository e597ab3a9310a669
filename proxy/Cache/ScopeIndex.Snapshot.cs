using System.Numerics;
using System.Runtime.InteropServices;

namespace RewriteProxy.Cache;

/// <summary>One scope's part of an index snapshot: its rows in row order, and its graph.</summary>
internal sealed partial class ScopeIndex
{
    /// <summary>The graph, when the scope has one (writer only: a snapshot saves it while holding off writers).</summary>
    public ScopeGraph? Graph => _graph;

    /// <summary>The ids of the rows, in row order (a copy; writer only).</summary>
    public long[] Ids() => _ids.AsSpan(0, _count).ToArray();

    /// <summary>
    /// Writes the ids (<c>long</c> each), then the vectors (<c>float</c> × dimensions each), in row order, little-endian
    /// (writer only: rows change only under writers, so no lock is needed to read them).
    /// </summary>
    public void WriteRows(Stream output)
    {
        output.Write(MemoryMarshal.AsBytes(_ids.AsSpan(0, _count)));
        for (var c = 0; c < _chunks.Count; c++)
        {
            var rows = Math.Min(ChunkRows, _count - c * ChunkRows);
            if (rows <= 0) break;
            output.Write(MemoryMarshal.AsBytes(_chunks[c].AsSpan(0, rows * _dimensions)));
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
