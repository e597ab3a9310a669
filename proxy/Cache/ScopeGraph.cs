using System.Reflection;
using Cloud.Unum.USearch;

namespace RewriteProxy.Cache;

/// <summary>Tuning of the HNSW graph used for large scopes. Defaults are the ones measured in docs/measurements/index.md.</summary>
public sealed record HnswSettings
{
    /// <summary>Neighbours per node (HNSW "M"). 16 is the library default and the common choice for a few hundred
    /// dimensions (common practice); higher costs memory and build time for little recall at our sizes.</summary>
    public int Connectivity { get; init; } = 16;

    /// <summary>Candidate list size while inserting ("efConstruction"); larger builds a better graph, slower.</summary>
    public int ExpansionAdd { get; init; } = 128;

    /// <summary>Candidate list size while searching ("ef"); the main recall/latency knob, chosen from the
    /// recall@1 measurement at 1M entries.</summary>
    public int ExpansionSearch { get; init; } = 256;

    /// <summary>How many graph candidates are reranked with exact full-precision similarity; at least k.</summary>
    public int RerankCandidates { get; init; } = 16;

    /// <summary>Precision of the vectors inside the graph. Half precision halves the graph's copy of the vectors;
    /// the exact rows rerank, so reported similarities stay full precision.</summary>
    public ScalarKind Quantization { get; init; } = ScalarKind.Float16;

    /// <summary>
    /// Threads used to insert when a graph is built in bulk (start-up load, conversion). Default 1: with 2 build
    /// threads, 9 of 15 runs of VectorIndexTests found a stored vector unreachable from its own query (USearch issue
    /// #735 reports nodes lost to parallel inserts); with 1 thread, 0 of 15. The bulk build runs in the background,
    /// so the slower start-up costs no request.
    /// </summary>
    public int BuildThreads { get; init; } = 1;
}

/// <summary>
/// An HNSW graph over one scope's rows, through <see cref="USearchIndex"/> (inner product metric: the vectors are
/// unit length, so distance = 1 − cosine). Keys are entry ids.
/// </summary>
/// <remarks>
/// Two limits of the native index shape this wrapper:
/// (1) it keeps one search/insert context per hardware thread, and more concurrent callers than that crash it
/// (USearch issues #389, #550, #598), so every native call passes <see cref="_slots"/>;
/// (2) <see cref="USearchIndex.Add(ulong, float[])"/> grows capacity by exactly one when full, which copies the
/// whole node table on every insert, so we grow geometrically ahead of it through the wrapper's own private
/// reserve, and only while no other call is inside the index (a reserve reallocates what searches read).
/// </remarks>
internal sealed partial class ScopeGraph : IDisposable
{
    private static readonly Action<USearchIndex, ulong> IncreaseCapacity = BindIncreaseCapacity();

    private readonly USearchIndex _index;
    private readonly SemaphoreSlim _slots;
    private readonly int _slotCount;
    private int _disposed;

    public ScopeGraph(int dimensions, HnswSettings settings, int capacity)
    {
        _index = new USearchIndex(MetricKind.Ip, settings.Quantization, (ulong)dimensions,
            (ulong)settings.Connectivity, (ulong)settings.ExpansionAdd, (ulong)settings.ExpansionSearch);
        // The native reserve sizes its contexts by std::thread::hardware_concurrency; ProcessorCount never exceeds it.
        _slotCount = Math.Max(1, Environment.ProcessorCount);
        _slots = new SemaphoreSlim(_slotCount, _slotCount);
        BuildThreads = Math.Clamp(settings.BuildThreads, 1, _slotCount);
        IncreaseCapacity(_index, (ulong)capacity);
    }

    private int BuildThreads { get; }

    public ulong Size => _index.Size();

    /// <summary>Inserts one vector. The caller serialises writers.</summary>
    public void Add(long id, ReadOnlySpan<float> vector)
    {
        EnsureCapacity(1);
        var copy = vector.ToArray();
        _slots.Wait();
        try { _index.Add((ulong)id, copy); }
        finally { _slots.Release(); }
    }

    /// <summary>Bulk insert of rows 0..count-1 at build time, on <see cref="BuildThreads"/> threads.</summary>
    public void AddMany(int count, Func<int, (long Id, float[] Vector)> row)
    {
        EnsureCapacity(count);
        var next = -1;
        var workers = new Task[BuildThreads];
        for (var w = 0; w < workers.Length; w++)
        {
            workers[w] = Task.Factory.StartNew(() =>
            {
                int i;
                while ((i = Interlocked.Increment(ref next)) < count)
                {
                    var (id, vector) = row(i);
                    _slots.Wait();
                    try { _index.Add((ulong)id, vector); }
                    finally { _slots.Release(); }
                }
            }, CancellationToken.None, TaskCreationOptions.LongRunning, TaskScheduler.Default);
        }
        Task.WaitAll(workers);
    }

    public void Remove(long id)
    {
        _slots.Wait();
        try { _index.Remove((ulong)id); }
        finally { _slots.Release(); }
    }

    /// <summary>Ids of up to <paramref name="count"/> nearest vectors, nearest first.</summary>
    public ulong[] Search(ReadOnlySpan<float> query, int count)
    {
        var q = query.ToArray();
        _slots.Wait();
        try
        {
            _index.Search(q, count, out var keys, out _);
            return keys;
        }
        finally { _slots.Release(); }
    }

    private void EnsureCapacity(int more)
    {
        var size = _index.Size();
        var capacity = _index.Capacity();
        if (size + (ulong)more <= capacity) return;
        var target = Math.Max(size + (ulong)more, capacity + capacity / 2 + 64);
        // Hold every slot so no search or insert is inside the index while it reallocates.
        for (var i = 0; i < _slotCount; i++) _slots.Wait();
        try { IncreaseCapacity(_index, target - size); }
        finally { _slots.Release(_slotCount); }
    }

    private static Action<USearchIndex, ulong> BindIncreaseCapacity()
    {
        // USearchIndex.IncreaseCapacity(ulong n) reserves Size() + n; verified against Cloud.Unum.USearch 2.26.6.
        var method = typeof(USearchIndex).GetMethod("IncreaseCapacity", BindingFlags.NonPublic | BindingFlags.Instance,
            [typeof(ulong)]) ?? throw new MissingMethodException(nameof(USearchIndex), "IncreaseCapacity");
        return method.CreateDelegate<Action<USearchIndex, ulong>>();
    }

    public void Dispose()
    {
        if (Interlocked.Exchange(ref _disposed, 1) != 0) return;
        for (var i = 0; i < _slotCount; i++) _slots.Wait();
        _index.Dispose();
        _slots.Dispose();
    }
}
