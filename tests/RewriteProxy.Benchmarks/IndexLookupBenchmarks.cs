using System.Diagnostics;
using System.Globalization;
using BenchmarkDotNet.Attributes;
using BenchmarkDotNet.Columns;
using BenchmarkDotNet.Configs;
using BenchmarkDotNet.Jobs;
using RewriteProxy.Cache;

namespace RewriteProxy.Benchmarks;

/// <summary>
/// Lookup time of one scope holding <see cref="Size"/> clustered entries, searched exactly or through the HNSW
/// graph. The setup (one per process) also records what BenchmarkDotNet does not: bulk load time, memory,
/// recall@1 of the graph against brute force, and p50/p99 of lookups from a Stopwatch loop; these go to the
/// console as one table row prefixed 'index-measurement'.
/// </summary>
[Config(typeof(IndexBenchmarkConfig))]
public class IndexLookupBenchmarks
{
    private const string Scope = "draft|model|fingerprint|params|partition";
    /// <summary>The width of all-MiniLM-L6-v2, the shipped model, as measured.</summary>
    private const int Dimensions = 384;
    private const int K = 4;
    private const int QueryCount = 1000;
    private const int TimedLookups = 3000;

    /// <summary>Below the default hit thresholds (≈ 0.9) so the filter prunes nothing and all k are ranked.</summary>
    private const float MinSimilarity = 0.5f;

    private VectorIndex _index = null!;
    private float[][] _queries = null!;
    private int _next;

    [ParamsSource(nameof(Sizes))]
    public int Size { get; set; }

    [ParamsSource(nameof(Modes))]
    public string Mode { get; set; } = "exact";

    /// <summary>1k…1M, or the comma-separated list in INDEX_BENCH_SIZES (to run one size at a time).</summary>
    public static IEnumerable<int> Sizes() =>
        (Environment.GetEnvironmentVariable("INDEX_BENCH_SIZES") ?? "1000,10000,100000,1000000")
        .Split(',', StringSplitOptions.RemoveEmptyEntries).Select(s => int.Parse(s, CultureInfo.InvariantCulture));

    /// <summary>exact and hnsw, or the list in INDEX_BENCH_MODES.</summary>
    public static IEnumerable<string> Modes() =>
        (Environment.GetEnvironmentVariable("INDEX_BENCH_MODES") ?? "exact,hnsw").Split(',', StringSplitOptions.RemoveEmptyEntries);

    [GlobalSetup]
    public void Setup()
    {
        var rows = IndexData.Clustered(Size, Dimensions, seed: 17);
        _queries = IndexData.Queries(rows, QueryCount, seed: 29);

        GC.Collect(2, GCCollectionMode.Forced, blocking: true, compacting: true);
        var managedBefore = GC.GetTotalMemory(true);
        var rssBefore = Process.GetCurrentProcess().WorkingSet64;
        var switchSize = Mode == "hnsw" ? 2 : int.MaxValue;
        _index = new VectorIndex(dimensions: Dimensions, switchSize: switchSize);
        var build = Stopwatch.StartNew();
        _index.Load(rows.Select((v, i) => (Scope, (long)i, v)));
        build.Stop();
        GC.Collect(2, GCCollectionMode.Forced, blocking: true, compacting: true);
        var managed = GC.GetTotalMemory(true) - managedBefore;
        var rss = Process.GetCurrentProcess().WorkingSet64 - rssBefore;

        var recall = double.NaN;
        if (Mode == "hnsw" && Size >= 10_000)
        {
            var hits = 0;
            Parallel.For(0, _queries.Length, q =>
            {
                var expected = IndexData.Nearest(rows, _queries[q]);
                var got = _index.Search(Scope, _queries[q], K, -1f);
                if (got.Count > 0 && got[0].Id == expected) Interlocked.Increment(ref hits);
            });
            recall = hits / (double)_queries.Length;
        }

        for (var i = 0; i < 200; i++) _index.Search(Scope, _queries[i % QueryCount], K, MinSimilarity);
        var times = new double[TimedLookups];
        for (var i = 0; i < TimedLookups; i++)
        {
            var start = Stopwatch.GetTimestamp();
            _index.Search(Scope, _queries[i % QueryCount], K, MinSimilarity);
            times[i] = Stopwatch.GetElapsedTime(start).TotalMilliseconds;
        }
        Array.Sort(times);

        var line = string.Create(CultureInfo.InvariantCulture,
            $"| {Mode} | {Size:N0} | {build.Elapsed.TotalSeconds:F2} | {managed / 1048576.0:F0} | {rss / 1048576.0:F0} | " +
            $"{(double.IsNaN(recall) ? "-" : recall.ToString("F3", CultureInfo.InvariantCulture))} | " +
            $"{times[TimedLookups / 2]:F3} | {times[TimedLookups * 99 / 100]:F3} | {times[^1]:F3} |");
        // BenchmarkDotNet copies the child process's console into its log: grep 'index-measurement'.
        Console.WriteLine("index-measurement " + line);
    }

    [Benchmark]
    public int Lookup()
    {
        var q = _queries[_next++ % QueryCount];
        return _index.Search(Scope, q, K, MinSimilarity).Count;
    }

    [GlobalCleanup]
    public void Cleanup() => _index.Dispose();
}

/// <summary>One launch, few iterations: enough to rank exact against graph on a shared 2-core machine.</summary>
public sealed class IndexBenchmarkConfig : ManualConfig
{
    public IndexBenchmarkConfig()
    {
        AddJob(Job.ShortRun.WithLaunchCount(1).WithWarmupCount(3).WithIterationCount(5));
        AddColumn(StatisticColumn.Median, StatisticColumn.P95, StatisticColumn.Max);
    }
}
