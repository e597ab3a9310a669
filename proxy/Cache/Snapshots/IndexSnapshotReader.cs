using System.Buffers.Binary;
using System.IO.MemoryMappedFiles;
using System.Runtime.InteropServices;
using System.Security.Cryptography;
using System.Text;
using Cloud.Unum.USearch;

namespace RewriteProxy.Cache.Snapshots;

/// <summary>
/// An index snapshot opened for reading, mapped into memory. <see cref="Open"/> trusts nothing it has not checked: the
/// magic bytes, the format version, the length and the SHA-256 over every byte; <see cref="Check"/> then compares where
/// it came from with what this process runs; only then does <see cref="ReadScopes"/> build scopes from it. Graphs are
/// reloaded straight from the mapped bytes, with no second copy of the file.
/// </summary>
public sealed unsafe class IndexSnapshotReader : IDisposable
{
    const int HashPiece = 64 << 20;

    readonly MemoryMappedFile _map;
    readonly MemoryMappedViewAccessor _view;
    readonly byte* _base;
    readonly long _length;
    readonly long _scopesAt;

    public IndexSnapshotHeader Header { get; }

    IndexSnapshotReader(MemoryMappedFile map, MemoryMappedViewAccessor view, byte* start, long length)
    {
        _map = map;
        _view = view;
        _base = start;
        _length = length;
        long at = IndexSnapshotFormat.FixedHeaderBytes;
        var modelId = ReadString(ref at);
        var storeId = ReadString(ref at);
        var library = ReadString(ref at);
        _scopesAt = at;
        Header = new IndexSnapshotHeader(Int32(IndexSnapshotFormat.VersionAt), Int64(IndexSnapshotFormat.FileLengthAt),
            DateTimeOffset.FromUnixTimeMilliseconds(Int64(IndexSnapshotFormat.SavedAtAt)), Int64(IndexSnapshotFormat.SequenceAt),
            Int64(IndexSnapshotFormat.EntriesAt), Int32(IndexSnapshotFormat.ScopesAt), Int32(IndexSnapshotFormat.GraphsAt),
            Int32(IndexSnapshotFormat.DimensionsAt), Int32(IndexSnapshotFormat.ConnectivityAt), (ScalarKind)Int32(IndexSnapshotFormat.QuantizationAt),
            modelId, storeId, library);
    }

    /// <summary>Maps the file and checks its magic, format version, length and checksum.</summary>
    /// <exception cref="FileNotFoundException">there is no snapshot.</exception>
    /// <exception cref="SnapshotRejectedException">it must not be used; <see cref="SnapshotRejectedException.Reason"/> says why.</exception>
    public static IndexSnapshotReader Open(string path)
    {
        IndexSnapshotFormat.RequireLittleEndian();
        var length = new FileInfo(path).Length;
        Span<byte> head = stackalloc byte[IndexSnapshotFormat.FixedHeaderBytes];
        using (var file = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read))
            head = head[..file.ReadAtLeast(head, head.Length, throwOnEndOfStream: false)];
        var magic = IndexSnapshotFormat.Magic;
        var shown = Math.Min(head.Length, magic.Length);
        if (!head[..shown].SequenceEqual(magic[..shown]))
            throw new SnapshotRejectedException(SnapshotRejection.NotASnapshot, "it does not start with " + Encoding.ASCII.GetString(magic));
        if (head.Length < IndexSnapshotFormat.FixedHeaderBytes)
            throw new SnapshotRejectedException(SnapshotRejection.Truncated, $"{length} bytes, shorter than the header");
        var version = BinaryPrimitives.ReadInt32LittleEndian(head[IndexSnapshotFormat.VersionAt..]);
        if (version > IndexSnapshotFormat.Version)
            throw new SnapshotRejectedException(SnapshotRejection.NewerFormat, $"format version {version}; this proxy reads {IndexSnapshotFormat.Version}");
        if (version < IndexSnapshotFormat.Version)
            throw new SnapshotRejectedException(SnapshotRejection.OlderFormat, $"format version {version}; this proxy reads {IndexSnapshotFormat.Version}");
        var written = BinaryPrimitives.ReadInt64LittleEndian(head[IndexSnapshotFormat.FileLengthAt..]);
        if (length < written)
            throw new SnapshotRejectedException(SnapshotRejection.Truncated, $"{length} of the {written} bytes written");
        if (length != written || written < IndexSnapshotFormat.FixedHeaderBytes + IndexSnapshotFormat.ChecksumBytes)
            throw new SnapshotRejectedException(SnapshotRejection.BadChecksum, $"{length} bytes where {written} were written");

        var map = MemoryMappedFile.CreateFromFile(path, FileMode.Open, null, 0, MemoryMappedFileAccess.Read);
        MemoryMappedViewAccessor? view = null;
        try
        {
            view = map.CreateViewAccessor(0, length, MemoryMappedFileAccess.Read);
            byte* start = null;
            view.SafeMemoryMappedViewHandle.AcquirePointer(ref start);
            start += view.PointerOffset;
            VerifyChecksum(start, length);
            try
            {
                return new IndexSnapshotReader(map, view, start, length);
            }
            catch (ArgumentOutOfRangeException e)
            {
                throw new SnapshotRejectedException(SnapshotRejection.Malformed, "its header runs past its end: " + e.Message);
            }
        }
        catch
        {
            if (view is not null)
            {
                view.SafeMemoryMappedViewHandle.ReleasePointer();
                view.Dispose();
            }
            map.Dispose();
            throw;
        }
    }

    static void VerifyChecksum(byte* start, long length)
    {
        var body = length - IndexSnapshotFormat.ChecksumBytes;
        using var sha = IncrementalHash.CreateHash(HashAlgorithmName.SHA256);
        for (long at = 0; at < body; at += HashPiece)
            sha.AppendData(new ReadOnlySpan<byte>(start + at, (int)Math.Min(HashPiece, body - at)));
        if (!sha.GetHashAndReset().AsSpan().SequenceEqual(new ReadOnlySpan<byte>(start + body, IndexSnapshotFormat.ChecksumBytes)))
            throw new SnapshotRejectedException(SnapshotRejection.BadChecksum, "its SHA-256 does not match its contents");
    }

    /// <summary>Compares how the snapshot was made with what this process runs (the store is checked by <see cref="CheckStore"/>).</summary>
    /// <exception cref="SnapshotRejectedException">another model, dimensions, or graph library or settings.</exception>
    public void Check(string modelId, int dimensions, HnswSettings hnsw)
    {
        var h = Header;
        if (h.ModelId != modelId)
            throw new SnapshotRejectedException(SnapshotRejection.OtherModel, $"made with embedding model {h.ModelId}, this process runs {modelId}");
        if (h.Dimensions != dimensions)
            throw new SnapshotRejectedException(SnapshotRejection.OtherDimensions, $"vectors of {h.Dimensions} dimensions, this process makes {dimensions}");
        if (h.GraphLibrary != ScopeGraph.LibraryVersion || h.Connectivity != hnsw.Connectivity || h.Quantization != hnsw.Quantization)
            throw new SnapshotRejectedException(SnapshotRejection.OtherGraphs,
                $"graphs of USearch {h.GraphLibrary} (M {h.Connectivity}, {h.Quantization}), this process runs {ScopeGraph.LibraryVersion} " +
                $"(M {hnsw.Connectivity}, {hnsw.Quantization})");
    }

    /// <summary>Checks that the snapshot was made from this store (a store made anew has another id: its ids name other entries).</summary>
    /// <exception cref="SnapshotRejectedException">another store.</exception>
    public static void CheckStore(IndexSnapshotHeader header, string storeId)
    {
        if (header.StoreId != storeId)
            throw new SnapshotRejectedException(SnapshotRejection.OtherStore, $"made from store {header.StoreId}, this store is {storeId}");
    }

    /// <summary>The scopes, rows and graphs, built off to the side; the caller publishes them (<c>VectorIndex.Restore</c>) or disposes them.</summary>
    /// <exception cref="SnapshotRejectedException">the contents do not add up (<see cref="SnapshotRejection.Malformed"/>).</exception>
    internal List<ScopeIndex> ReadScopes(HnswSettings hnsw)
    {
        var scopes = new List<ScopeIndex>(Header.Scopes);
        try
        {
            long at = _scopesAt, entries = 0;
            var graphs = 0;
            var names = new HashSet<string>(StringComparer.Ordinal);
            var dimensions = Header.Dimensions;
            for (var i = 0; i < Header.Scopes; i++)
            {
                var name = ReadString(ref at);
                if (!names.Add(name)) throw new FormatException($"scope {name} appears twice");
                var rows = Int32(at);
                at += 4;
                if (rows <= 0) throw new FormatException($"scope {name} has {rows} rows");
                var idsAt = Within(at, rows * 8L);
                var vectorsAt = Within(idsAt + rows * 8L, rows * 4L * dimensions);
                at = vectorsAt + rows * 4L * dimensions;
                ScopeGraph? graph = null;
                var hasGraph = _base[Within(at, 1)];
                if (hasGraph > 1) throw new FormatException($"scope {name} has graph flag {hasGraph}");
                if (hasGraph == 1)
                {
                    var graphLength = Int64(at + 1);
                    var graphAt = Within(at + 9, graphLength);
                    graph = ScopeGraph.Load(dimensions, hnsw, _base + graphAt, graphLength);
                    at = graphAt + graphLength;
                    graphs++;
                }
                else at++;
                scopes.Add(ScopeIndex.FromRows(name, dimensions, rows, (first, n, ids, vectors) =>
                {
                    new ReadOnlySpan<byte>(_base + idsAt + first * 8L, n * 8).CopyTo(MemoryMarshal.AsBytes(ids));
                    new ReadOnlySpan<byte>(_base + vectorsAt + first * 4L * dimensions, n * 4 * dimensions).CopyTo(MemoryMarshal.AsBytes(vectors));
                }, graph));
                entries += rows;
            }
            if (at != _length - IndexSnapshotFormat.ChecksumBytes || entries != Header.Entries || graphs != Header.Graphs)
                throw new FormatException($"{entries} entries and {graphs} graphs ending at byte {at}, where the header says " +
                    $"{Header.Entries} and {Header.Graphs} ending at {_length - IndexSnapshotFormat.ChecksumBytes}");
            return scopes;
        }
        catch (Exception e) when (e is FormatException or ArgumentOutOfRangeException)
        {
            foreach (var scope in scopes) scope.Dispose();
            throw new SnapshotRejectedException(SnapshotRejection.Malformed, e.Message);
        }
    }

    /// <summary><paramref name="at"/>, when <paramref name="count"/> bytes from there lie before the checksum.</summary>
    long Within(long at, long count)
    {
        if (count < 0 || at < 0 || at + count > _length - IndexSnapshotFormat.ChecksumBytes)
            throw new ArgumentOutOfRangeException(nameof(at), $"{count} bytes at {at} run past the end");
        return at;
    }

    int Int32(long at) => BinaryPrimitives.ReadInt32LittleEndian(new ReadOnlySpan<byte>(_base + Within(at, 4), 4));

    long Int64(long at) => BinaryPrimitives.ReadInt64LittleEndian(new ReadOnlySpan<byte>(_base + Within(at, 8), 8));

    string ReadString(ref long at)
    {
        var bytes = Int32(at);
        var text = Encoding.UTF8.GetString(new ReadOnlySpan<byte>(_base + Within(at + 4, bytes), bytes));
        at += 4 + bytes;
        return text;
    }

    public void Dispose()
    {
        _view.SafeMemoryMappedViewHandle.ReleasePointer();
        _view.Dispose();
        _map.Dispose();
    }
}
