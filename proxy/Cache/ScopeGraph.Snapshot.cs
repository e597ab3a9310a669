using System.Reflection;
using System.Runtime.InteropServices;
using Cloud.Unum.USearch;

namespace RewriteProxy.Cache;

/// <summary>
/// Saving and reloading a graph for index snapshots, in USearch's own serialization: its header, every node's level
/// and neighbour lists, the entry point and the graph's (f16) vectors. Reloading restores that structure as it was,
/// so the reloaded graph answers every search as the saved one did, without re-running construction (minutes at 1M).
/// </summary>
/// <remarks>
/// The .NET binding saves to a file but reloads only from one (a second copy of ~900 MB at 1M entries); its native
/// library also reloads from memory (<c>usearch_load_buffer</c>), which we call on the binding's handle, read by
/// reflection like <see cref="IncreaseCapacity"/> (verified against Cloud.Unum.USearch 2.26.6).
/// </remarks>
internal sealed partial class ScopeGraph
{
    private static readonly FieldInfo HandleField = typeof(USearchIndex).GetField("_index", BindingFlags.NonPublic | BindingFlags.Instance)
        ?? throw new MissingFieldException(nameof(USearchIndex), "_index");

    /// <summary>The graph library's version: another version may serialise its graphs otherwise, so snapshots record it.</summary>
    public static string LibraryVersion { get; } = USearchCapabilities.Version();

    /// <summary>Entries the graph holds, removed ones included until USearch reuses their slots.</summary>
    public ulong Capacity => _index.Capacity();

    /// <summary>Writes the graph to <paramref name="path"/> (the caller serialises writers, so nothing changes meanwhile).</summary>
    public void Save(string path)
    {
        _slots.Wait();
        try { _index.Save(path); }
        finally { _slots.Release(); }
    }

    /// <summary>A graph read back from what <see cref="Save"/> wrote, <paramref name="length"/> bytes at <paramref name="data"/>.</summary>
    /// <exception cref="FormatException">the bytes are not a graph of these dimensions.</exception>
    public static unsafe ScopeGraph Load(int dimensions, HnswSettings settings, byte* data, long length)
    {
        var graph = new ScopeGraph(dimensions, settings, capacity: 1);
        try
        {
            var handle = (nint)HandleField.GetValue(graph._index)!;
            LoadBuffer(handle, data, (nuint)length, out var error);
            ThrowIfFailed(error);
            if (graph._index.Dimensions() != (ulong)dimensions)
                throw new FormatException($"the graph has {graph._index.Dimensions()} dimensions, the index {dimensions}");
            // Search and insert breadth are settings of this process, not of the saved graph.
            ChangeExpansionAdd(handle, (nuint)settings.ExpansionAdd, out error);
            ThrowIfFailed(error);
            ChangeExpansionSearch(handle, (nuint)settings.ExpansionSearch, out error);
            ThrowIfFailed(error);
            // Reserving again gives the loaded index its per-thread contexts and room to grow.
            graph.EnsureCapacity(64);
            return graph;
        }
        catch
        {
            graph.Dispose();
            throw;
        }
    }

    /// <summary>USearch reports a failure as a pointer to a static message; zero is success.</summary>
    private static void ThrowIfFailed(nint error)
    {
        if (error != 0) throw new FormatException("the graph library refused it: " + Marshal.PtrToStringUTF8(error));
    }

    // The binding's own library (NativeMethods.LibraryName), so the handle and these calls meet in one native image.
    [LibraryImport("libusearch_c", EntryPoint = "usearch_load_buffer")]
    private static unsafe partial void LoadBuffer(nint index, byte* buffer, nuint length, out nint error);

    [LibraryImport("libusearch_c", EntryPoint = "usearch_change_expansion_add")]
    private static partial void ChangeExpansionAdd(nint index, nuint expansion, out nint error);

    [LibraryImport("libusearch_c", EntryPoint = "usearch_change_expansion_search")]
    private static partial void ChangeExpansionSearch(nint index, nuint expansion, out nint error);
}
