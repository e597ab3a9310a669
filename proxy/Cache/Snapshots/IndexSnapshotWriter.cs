using System.Buffers.Binary;
using System.Diagnostics;
using System.Security.Cryptography;
using System.Text;

namespace RewriteProxy.Cache.Snapshots;

/// <summary>
/// Where a snapshot comes from: what a reader checks before trusting it. <c>Sequence</c> is a change sequence every
/// scope reflects at least: read before the first scope is saved.
/// </summary>
public sealed record SnapshotOrigin(string ModelId, string StoreId, long Sequence);

/// <summary>
/// What a save wrote, and how long it took. <c>LongestHold</c> is the longest time index writers were held off (to
/// freeze a scope's view, or to end it); searches never wait for a save.
/// </summary>
public sealed record SnapshotSaved(long Bytes, long Entries, int Scopes, int Graphs, TimeSpan Elapsed, TimeSpan LongestHold);

/// <summary>
/// Saves a <see cref="VectorIndex"/> in the <see cref="IndexSnapshotFormat"/>: to a temporary file in the snapshot's
/// folder, created private (0600: the vectors are derived from users' questions), flushed to disk, then renamed over
/// the previous snapshot, so a reader sees the old file or the new one, never half of one.
/// </summary>
public static class IndexSnapshotWriter
{
    /// <summary>Private to the proxy's user: the vectors are derived from users' questions.</summary>
    public const UnixFileMode FileMode = UnixFileMode.UserRead | UnixFileMode.UserWrite;

    const UnixFileMode FolderMode = UnixFileMode.UserRead | UnixFileMode.UserWrite | UnixFileMode.UserExecute;
    const int BufferBytes = 1 << 20;

    /// <summary>
    /// Writes the snapshot. <paramref name="origin"/>'s sequence must have been read before this call: each scope is
    /// saved later, as of a sequence at least that new, and replaying changes is idempotent, so replaying from it is
    /// correct for every scope.
    /// </summary>
    /// <param name="index">The index to save.</param>
    /// <param name="origin">The model, store and change sequence the index holds.</param>
    /// <param name="path">The snapshot file; its folder is made (0700) if missing.</param>
    /// <param name="stillValid">Asked before the new file replaces the old: false (the index was rebuilt meanwhile, so
    /// it may mix two states) discards it.</param>
    /// <returns>What was written; null when <paramref name="stillValid"/> said no.</returns>
    public static SnapshotSaved? Save(VectorIndex index, SnapshotOrigin origin, string path, Func<bool>? stillValid = null)
    {
        IndexSnapshotFormat.RequireLittleEndian();
        var watch = Stopwatch.StartNew();
        var full = Path.GetFullPath(path);
        var folder = Path.GetDirectoryName(full)!;
        if (!Directory.Exists(folder))
        {
            if (OperatingSystem.IsWindows()) Directory.CreateDirectory(folder);
            else Directory.CreateDirectory(folder, FolderMode);
        }
        var temporary = full + ".tmp";
        var graphFile = full + ".graph.tmp";
        try
        {
            long entries = 0;
            int scopes = 0, graphs = 0;
            var graphSaved = false;
            TimeSpan longest;
            using (var output = CreatePrivate(temporary, FileAccess.ReadWrite))
            {
                WriteHeader(output, index, origin);
                longest = index.ForEachScopeFrozen(frozen: view =>
                {
                    // The view stays as it was frozen while it is written; writers and searches go on meanwhile.
                    WriteString(output, view.Name);
                    WriteInt32(output, view.Count);
                    view.WriteRows(output);
                    entries += view.Count;
                    scopes++;
                    if (view.Graph is { } graph)
                    {
                        using (CreatePrivate(graphFile, FileAccess.Write)) { }
                        graph.Save(graphFile);
                        graphSaved = true;
                    }
                }, thawed: () =>
                {
                    output.WriteByte(graphSaved ? (byte)1 : (byte)0);
                    if (!graphSaved) return;
                    using var saved = new FileStream(graphFile, System.IO.FileMode.Open, FileAccess.Read, FileShare.None, BufferBytes);
                    WriteInt64(output, saved.Length);
                    saved.CopyTo(output, BufferBytes);
                    graphs++;
                    graphSaved = false;
                });
                PatchCounts(output, entries, scopes, graphs);
                AppendChecksum(output);
                output.Flush(flushToDisk: true);
            }
            if (stillValid is not null && !stillValid()) return null;
            File.Move(temporary, full, overwrite: true);
            return new SnapshotSaved(new FileInfo(full).Length, entries, scopes, graphs, watch.Elapsed, longest);
        }
        finally
        {
            File.Delete(temporary);
            File.Delete(graphFile);
        }
    }

    static void WriteHeader(Stream output, VectorIndex index, SnapshotOrigin origin)
    {
        Span<byte> fixedPart = stackalloc byte[IndexSnapshotFormat.FixedHeaderBytes];
        fixedPart.Clear();
        IndexSnapshotFormat.Magic.CopyTo(fixedPart);
        BinaryPrimitives.WriteInt32LittleEndian(fixedPart[IndexSnapshotFormat.VersionAt..], IndexSnapshotFormat.Version);
        BinaryPrimitives.WriteInt64LittleEndian(fixedPart[IndexSnapshotFormat.SavedAtAt..], DateTimeOffset.UtcNow.ToUnixTimeMilliseconds());
        BinaryPrimitives.WriteInt64LittleEndian(fixedPart[IndexSnapshotFormat.SequenceAt..], origin.Sequence);
        BinaryPrimitives.WriteInt32LittleEndian(fixedPart[IndexSnapshotFormat.DimensionsAt..], index.Dimensions);
        BinaryPrimitives.WriteInt32LittleEndian(fixedPart[IndexSnapshotFormat.ConnectivityAt..], index.Hnsw.Connectivity);
        BinaryPrimitives.WriteInt32LittleEndian(fixedPart[IndexSnapshotFormat.QuantizationAt..], (int)index.Hnsw.Quantization);
        output.Write(fixedPart);
        WriteString(output, origin.ModelId);
        WriteString(output, origin.StoreId);
        WriteString(output, ScopeGraph.LibraryVersion);
    }

    static void PatchCounts(FileStream output, long entries, int scopes, int graphs)
    {
        var end = output.Position + IndexSnapshotFormat.ChecksumBytes;
        Span<byte> number = stackalloc byte[8];
        void Patch(int at, ReadOnlySpan<byte> value)
        {
            output.Position = at;
            output.Write(value);
        }
        BinaryPrimitives.WriteInt64LittleEndian(number, end);
        Patch(IndexSnapshotFormat.FileLengthAt, number);
        BinaryPrimitives.WriteInt64LittleEndian(number, entries);
        Patch(IndexSnapshotFormat.EntriesAt, number);
        BinaryPrimitives.WriteInt32LittleEndian(number, scopes);
        Patch(IndexSnapshotFormat.ScopesAt, number[..4]);
        BinaryPrimitives.WriteInt32LittleEndian(number, graphs);
        Patch(IndexSnapshotFormat.GraphsAt, number[..4]);
        output.Position = end - IndexSnapshotFormat.ChecksumBytes;
    }

    /// <summary>Reads the file back from the start (from the page cache, just written) and appends its SHA-256.</summary>
    static void AppendChecksum(FileStream output)
    {
        var end = output.Position;
        output.Flush();
        output.Position = 0;
        using var sha = IncrementalHash.CreateHash(HashAlgorithmName.SHA256);
        var buffer = new byte[BufferBytes];
        for (long left = end; left > 0;)
        {
            var read = output.Read(buffer, 0, (int)Math.Min(buffer.Length, left));
            if (read == 0) throw new IOException("the snapshot ended while being checksummed");
            sha.AppendData(buffer, 0, read);
            left -= read;
        }
        output.Write(sha.GetHashAndReset());
    }

    static FileStream CreatePrivate(string path, FileAccess access)
    {
        // A stale file keeps its old mode when truncated; a new one is made with ours.
        File.Delete(path);
        var options = new FileStreamOptions { Mode = System.IO.FileMode.CreateNew, Access = access, BufferSize = BufferBytes };
        if (!OperatingSystem.IsWindows()) options.UnixCreateMode = FileMode;
        return new FileStream(path, options);
    }

    static void WriteString(Stream output, string text)
    {
        var bytes = Encoding.UTF8.GetBytes(text);
        WriteInt32(output, bytes.Length);
        output.Write(bytes);
    }

    static void WriteInt64(Stream output, long value)
    {
        Span<byte> bytes = stackalloc byte[8];
        BinaryPrimitives.WriteInt64LittleEndian(bytes, value);
        output.Write(bytes);
    }

    static void WriteInt32(Stream output, int value)
    {
        Span<byte> bytes = stackalloc byte[4];
        BinaryPrimitives.WriteInt32LittleEndian(bytes, value);
        output.Write(bytes);
    }
}
