using System.Globalization;
using System.Text.RegularExpressions;

namespace RewriteProxy.Cli.Demo;

/// <summary>
/// Samples read from a /metrics page in the Prometheus text exposition format (version 0.0.4): one
/// <c>name{label="value",...} number</c> per line, '#' lines for help and type. Only what the demo compares is needed:
/// counters, gauges and histogram <c>_count</c> series.
/// </summary>
public sealed partial class MetricsSnapshot
{
    readonly List<(string Name, IReadOnlyDictionary<string, string> Labels, double Value)> _samples = [];

    [GeneratedRegex("""^(?<name>[a-zA-Z_:][a-zA-Z0-9_:]*)(?:\{(?<labels>.*)\})?\s+(?<value>\S+)(?:\s+\S+)?$""")]
    private static partial Regex SampleLine();

    [GeneratedRegex("""(?<key>[a-zA-Z_][a-zA-Z0-9_]*)="(?<value>(?:[^"\\]|\\.)*)",?""")]
    private static partial Regex LabelPair();

    public static MetricsSnapshot Parse(string text)
    {
        var snapshot = new MetricsSnapshot();
        foreach (var raw in text.Split('\n'))
        {
            var line = raw.Trim();
            if (line.Length == 0 || line[0] == '#') continue;
            var m = SampleLine().Match(line);
            if (!m.Success) throw new FormatException($"not a Prometheus sample line: {line}");
            var labels = new Dictionary<string, string>(StringComparer.Ordinal);
            foreach (Match pair in LabelPair().Matches(m.Groups["labels"].Value))
                labels[pair.Groups["key"].Value] = Regex.Unescape(pair.Groups["value"].Value);
            var value = m.Groups["value"].Value switch
            {
                "+Inf" => double.PositiveInfinity,
                "-Inf" => double.NegativeInfinity,
                var v => double.Parse(v, NumberStyles.Float, CultureInfo.InvariantCulture),
            };
            snapshot._samples.Add((m.Groups["name"].Value, labels, value));
        }
        return snapshot;
    }

    /// <summary>Sum of the samples of <paramref name="name"/> whose labels include every given pair.</summary>
    public double Sum(string name, params (string Key, string Value)[] match) =>
        _samples.Where(s => s.Name == name && match.All(p => s.Labels.TryGetValue(p.Key, out var v) && v == p.Value))
            .Sum(s => s.Value);

    /// <summary>Per value of <paramref name="by"/>, the sum of the matching samples of <paramref name="name"/>.</summary>
    public Dictionary<string, double> SumBy(string name, string by, params (string Key, string Value)[] match) =>
        _samples.Where(s => s.Name == name && s.Labels.ContainsKey(by)
                            && match.All(p => s.Labels.TryGetValue(p.Key, out var v) && v == p.Value))
            .GroupBy(s => s.Labels[by])
            .ToDictionary(g => g.Key, g => g.Sum(s => s.Value), StringComparer.Ordinal);

    /// <summary>What grew between two scrapes of the same counters, per label value (zeros left out).</summary>
    public static Dictionary<string, long> Growth(Dictionary<string, double> before, Dictionary<string, double> after) =>
        after.Select(a => (a.Key, Value: (long)Math.Round(a.Value - before.GetValueOrDefault(a.Key))))
            .Where(a => a.Value != 0)
            .ToDictionary(a => a.Key, a => a.Value, StringComparer.Ordinal);
}
