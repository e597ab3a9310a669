using System.Collections.Frozen;
using System.Text.Json;

namespace RewriteProxy.Telemetry;

/// <summary>
/// Metric label values. Each label with reasons or results is a closed set: an enum beside the code that decides it
/// (<c>CacheResult</c>, <c>DropReason</c>, <c>AnchorReason</c>, <c>FailOpenReason</c>, <c>BypassReason</c>,
/// <c>ClaimOutcome</c>), and its
/// values are the members' names in snake_case (<c>NoQuestion</c> → <c>no_question</c>). So a value is declared once,
/// and nothing else can become a label.
/// </summary>
public static class LabelValue
{
    public static string Of<T>(T value) where T : struct, Enum => Set<T>.Labels[value];

    /// <summary>Every value of the set, in declaration order: what <see cref="ProxyMetrics.Declare"/> creates at zero.</summary>
    public static IReadOnlyList<string> All<T>() where T : struct, Enum => Set<T>.All;

    static class Set<T> where T : struct, Enum
    {
        public static readonly FrozenDictionary<T, string> Labels =
            Enum.GetValues<T>().ToFrozenDictionary(v => v, v => JsonNamingPolicy.SnakeCaseLower.ConvertName(v.ToString()));

        public static readonly IReadOnlyList<string> All = [.. Enum.GetValues<T>().Select(v => Labels[v])];
    }
}
