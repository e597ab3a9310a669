using BenchmarkDotNet.Columns;
using BenchmarkDotNet.Reports;
using BenchmarkDotNet.Running;

namespace RewriteProxy.Benchmarks.Hits;

/// <summary>
/// The 99th percentile of the measured iterations, in milliseconds. BenchmarkDotNet's built-in percentile columns stop
/// at P95 (and P100); with one call per iteration (see <see cref="HitBenchmarks"/>) this is the per-call p99.
/// </summary>
public sealed class P99Column : IColumn
{
    public string Id => nameof(P99Column);
    public string ColumnName => "P99 [ms]";
    public bool AlwaysShow => true;
    public ColumnCategory Category => ColumnCategory.Statistics;
    public int PriorityInCategory => 10;
    public bool IsNumeric => true;
    public UnitType UnitType => UnitType.Dimensionless;
    public string Legend => "99th percentile of the per-call latency, in milliseconds";

    public string GetValue(Summary summary, BenchmarkCase benchmarkCase) =>
        GetValue(summary, benchmarkCase, summary.Style);

    public string GetValue(Summary summary, BenchmarkCase benchmarkCase, SummaryStyle style)
    {
        var statistics = summary[benchmarkCase]?.ResultStatistics;
        return statistics is null ? "NA" : (statistics.Percentiles.Percentile(99) / 1e6).ToString("0.000", style.CultureInfo);
    }

    public bool IsDefault(Summary summary, BenchmarkCase benchmarkCase) => false;
    public bool IsAvailable(Summary summary) => true;
}
