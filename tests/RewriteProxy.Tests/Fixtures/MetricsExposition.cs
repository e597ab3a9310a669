using System.Globalization;
using System.Text;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>One sample line of a scrape.</summary>
public sealed record MetricSample(string Name, IReadOnlyDictionary<string, string> Labels, double Value);

/// <summary>
/// A scrape in the Prometheus text exposition format 0.0.4 (as the Prometheus project documents it: `# TYPE` lines,
/// then `name{label="value",...} value`, label values escaping backslash, double quote and newline), parsed by
/// the test itself so that what is asserted is the bytes a scraper receives.
/// </summary>
public sealed class MetricsExposition
{
    public string Text { get; }
    public IReadOnlyList<MetricSample> Samples { get; }

    /// <summary>Family name → counter | gauge | histogram | summary | untyped.</summary>
    public IReadOnlyDictionary<string, string> Types { get; }

    MetricsExposition(string text, List<MetricSample> samples, Dictionary<string, string> types)
    {
        Text = text;
        Samples = samples;
        Types = types;
    }

    /// <summary>GET /metrics of a proxy, parsed.</summary>
    public static async Task<MetricsExposition> ScrapeAsync(HttpClient client) => Parse(await client.GetStringAsync("/metrics"));

    public static MetricsExposition Parse(string text)
    {
        var samples = new List<MetricSample>();
        var types = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (var raw in text.Split('\n'))
        {
            var line = raw.TrimEnd('\r');
            if (line.Length == 0) continue;
            if (line.StartsWith("# TYPE ", StringComparison.Ordinal))
            {
                var parts = line.Split(' ', 4);
                types[parts[2]] = parts[3];
                continue;
            }
            if (line.StartsWith('#')) continue;
            samples.Add(ParseSample(line));
        }
        return new MetricsExposition(text, samples, types);
    }

    static MetricSample ParseSample(string line)
    {
        var i = 0;
        while (i < line.Length && line[i] != '{' && line[i] != ' ') i++;
        var name = line[..i];
        var labels = new Dictionary<string, string>(StringComparer.Ordinal);
        if (i < line.Length && line[i] == '{')
        {
            i++;
            while (line[i] != '}')
            {
                var eq = line.IndexOf('=', i);
                var label = line[i..eq];
                i = eq + 2; // past ="
                var value = new StringBuilder();
                while (line[i] != '"')
                {
                    if (line[i] == '\\')
                    {
                        i++;
                        value.Append(line[i] == 'n' ? '\n' : line[i]);
                    }
                    else value.Append(line[i]);
                    i++;
                }
                labels[label] = value.ToString();
                i++; // past "
                if (line[i] == ',') i++;
            }
            i++; // past }
        }
        var fields = line[i..].Trim().Split(' ');
        return new MetricSample(name, labels, ParseValue(fields[0]));
    }

    static double ParseValue(string text) => text switch
    {
        "+Inf" => double.PositiveInfinity,
        "-Inf" => double.NegativeInfinity,
        "NaN" => double.NaN,
        _ => double.Parse(text, NumberStyles.Float, CultureInfo.InvariantCulture),
    };

    /// <summary>Samples of <paramref name="name"/> whose labels include every given pair.</summary>
    public IEnumerable<MetricSample> Find(string name, params (string Label, string Value)[] labels) =>
        Samples.Where(s => s.Name == name && labels.All(l => s.Labels.TryGetValue(l.Label, out var v) && v == l.Value));

    /// <summary>Sum over <see cref="Find"/>; 0 when no sample matches (a series not yet created has counted nothing).</summary>
    public double Sum(string name, params (string Label, string Value)[] labels) => Find(name, labels).Sum(s => s.Value);

    /// <summary>Per value of <paramref name="by"/>, the sum of the matching samples of <paramref name="name"/>.</summary>
    public Dictionary<string, double> SumBy(string name, string by, params (string Label, string Value)[] labels) =>
        Find(name, labels).Where(s => s.Labels.ContainsKey(by)).GroupBy(s => s.Labels[by])
            .ToDictionary(g => g.Key, g => g.Sum(s => s.Value), StringComparer.Ordinal);

    /// <summary>The families of one prefix, re-serialised with their HELP and TYPE lines: for a lint pass over our own series only.</summary>
    public string OnlyFamilies(string prefix)
    {
        var kept = new StringBuilder();
        var keep = false;
        foreach (var line in Text.Split('\n'))
        {
            if (line.StartsWith("# HELP ", StringComparison.Ordinal) || line.StartsWith("# TYPE ", StringComparison.Ordinal))
                keep = line.Split(' ')[2].StartsWith(prefix, StringComparison.Ordinal);
            if (keep && line.Length > 0) kept.Append(line).Append('\n');
        }
        return kept.ToString();
    }
}
