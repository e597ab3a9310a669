using Cloud.Unum.USearch;

namespace RewriteProxy.Cache.Snapshots;

/// <summary>
/// The layout of an index snapshot file, format version 1. Every number is little-endian; a string is an int32 byte
/// count and its UTF-8 bytes.
/// <code>
///  0  magic "RPXINDEX" (8 bytes)        28  change sequence    int64      52  dimensions      int32
///  8  format version       int32        36  entries            int64      56  connectivity    int32  (HNSW M)
/// 12  file length          int64        44  scopes             int32      60  quantization    int32  (USearch ScalarKind)
/// 20  saved at (unix ms)   int64        48  graphs             int32
/// 64  embedding model id, store id, graph library version (strings)
/// then per scope: scope key (string), rows (int32), ids (int64 × rows), vectors (float32 × dimensions × rows, row
///      order), has graph (byte 0/1), and if 1: graph length (int64) and the graph in USearch's own serialization
///      (levels, neighbour lists, entry point, its f16 vectors: see ScopeGraph.Snapshot)
/// last 32 bytes: SHA-256 of every byte before them
/// </code>
/// The file length and the counts are written last (the scopes are only known once written), then the checksum.
/// </summary>
internal static class IndexSnapshotFormat
{
    public static ReadOnlySpan<byte> Magic => "RPXINDEX"u8;

    /// <summary>Raised whenever the layout changes; a reader refuses versions it does not know.</summary>
    public const int Version = 1;

    public const int FixedHeaderBytes = 64;
    public const int ChecksumBytes = 32;

    public const int VersionAt = 8;
    public const int FileLengthAt = 12;
    public const int SavedAtAt = 20;
    public const int SequenceAt = 28;
    public const int EntriesAt = 36;
    public const int ScopesAt = 44;
    public const int GraphsAt = 48;
    public const int DimensionsAt = 52;
    public const int ConnectivityAt = 56;
    public const int QuantizationAt = 60;

    /// <summary>Rows are written as the machine holds them; every platform the proxy ships for is little-endian.</summary>
    public static void RequireLittleEndian()
    {
        if (!BitConverter.IsLittleEndian) throw new PlatformNotSupportedException("index snapshots are little-endian");
    }
}

/// <summary>
/// What a snapshot says about itself: where it came from and what it holds. <c>Sequence</c> is the store's change
/// sequence the snapshot holds the index as of; the changes after it are replayed.
/// </summary>
public sealed record IndexSnapshotHeader(int FormatVersion, long FileLength, DateTimeOffset SavedAt, long Sequence, long Entries,
    int Scopes, int Graphs, int Dimensions, int Connectivity, ScalarKind Quantization, string ModelId, string StoreId, string GraphLibrary);

/// <summary>Why a snapshot was not used; the index is then rebuilt from the store.</summary>
public enum SnapshotRejection
{
    /// <summary>The file does not start with the magic bytes.</summary>
    NotASnapshot,
    /// <summary>Written by a newer proxy, in a layout this one does not know.</summary>
    NewerFormat,
    /// <summary>Written in an older layout this one no longer reads.</summary>
    OlderFormat,
    /// <summary>Shorter than its header says (a write cut short, a full disk).</summary>
    Truncated,
    /// <summary>The SHA-256 over its bytes does not match (damaged), or it is longer than written.</summary>
    BadChecksum,
    /// <summary>Made with another embedding model: its vectors mean something else.</summary>
    OtherModel,
    /// <summary>Vectors of another length.</summary>
    OtherDimensions,
    /// <summary>Made from another store (or one made anew): its ids name other entries.</summary>
    OtherStore,
    /// <summary>Graphs of another graph-library version or other graph settings (connectivity, quantization).</summary>
    OtherGraphs,
    /// <summary>The store no longer holds the changes after the snapshot's sequence (pruned, or restored from an older backup).</summary>
    ChangesGone,
    /// <summary>The checksum matched, yet the contents do not add up (a bug, or a crafted file).</summary>
    Malformed,
}

/// <summary>A snapshot that must not be used, and why.</summary>
public sealed class SnapshotRejectedException(SnapshotRejection reason, string message) : Exception(message)
{
    public SnapshotRejection Reason { get; } = reason;
}
