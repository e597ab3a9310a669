using System.Runtime;
using System.Runtime.InteropServices;

namespace RewriteProxy;

/// <summary>
/// One full, compacting collection, large object heap included. Start-up allocates large, short-lived buffers (the
/// model's bytes, the decompressed WordNet tables while they are parsed) that only a full collection reclaims, and an
/// idle or lightly loaded proxy may not run one for hours: until then they stay committed and resident.
/// Called once per load, before any request is served (docs/measurements/performance.md).
/// </summary>
public static class HeapCompaction
{
    public static void Now()
    {
        GCSettings.LargeObjectHeapCompactionMode = GCLargeObjectHeapCompactionMode.CompactOnce;
        GC.Collect(GC.MaxGeneration, GCCollectionMode.Aggressive, blocking: true, compacting: true);
        TrimNativeHeap();
    }

    /// <summary>
    /// glibc keeps memory that native code freed (ONNX Runtime's copies of the model while it builds a session) in its
    /// heaps, resident, unless it sits at the top of a heap; malloc_trim(0) returns every free page to the system.
    /// </summary>
    static void TrimNativeHeap()
    {
        if (!OperatingSystem.IsLinux()) return;
        try { malloc_trim(0); }
        catch (EntryPointNotFoundException) { } // not glibc (musl): nothing to trim this way
        catch (DllNotFoundException) { }
    }

    [DllImport("libc", EntryPoint = "malloc_trim")]
    static extern int malloc_trim(nuint pad);
}
