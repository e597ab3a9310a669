using System.Text.RegularExpressions;
using RewriteProxy.Cache;
using RewriteProxy.Guard;
using RewriteProxy.Lanes;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Telemetry;

/// <summary>
/// The closed sets are the only source of label values: README's metric table, the Prometheus rules and their tests
/// name no value the proxy cannot produce, and README lists every value it can.
/// </summary>
public sealed class LabelValueTests
{
    static readonly Dictionary<string, IReadOnlyList<string>> SetsBySeries = new()
    {
        ["rewriteproxy_lookups_total"] = LabelValue.All<CacheResult>(),
        ["rewriteproxy_guard_rejections_total"] = LabelValue.All<AnchorReason>(),
        ["rewriteproxy_dropped_total"] = LabelValue.All<DropReason>(),
        ["rewriteproxy_fail_open_total"] = LabelValue.All<FailOpenReason>(),
        ["rewriteproxy_drift"] = ProxyMetrics.Verdicts,
    };

    [Fact]
    public void Labels_are_the_members_names_in_snake_case()
    {
        Assert.Equal(["hit_exact", "hit_semantic", "miss", "bypass", "probe_hit", "probe_miss"], LabelValue.All<CacheResult>());
        Assert.Equal("no_question", LabelValue.Of(BypassReason.NoQuestion));
        Assert.Equal("n", LabelValue.Of(BypassReason.N));
        Assert.Equal(["drift", "echo", "duplicate", "surplus"], LabelValue.All<DropReason>());
    }

    [Fact]
    public void Readme_metric_table_lists_exactly_the_values_each_series_can_have()
    {
        var readme = File.ReadAllText(RepositoryRoot.File("README.md"));
        foreach (var (series, set) in SetsBySeries)
        {
            var row = Regex.Match(readme, $@"^\| `{series}` \| \w+ \| (?<labels>[^|]+) \|", RegexOptions.Multiline);
            Assert.True(row.Success, $"README has no row for {series}");
            var listed = Regex.Match(row.Groups["labels"].Value, @"(?:reason|result|verdict) = (?<values>[a-z_, ]+)");
            Assert.True(listed.Success, $"README's row for {series} lists no values");
            Assert.Equal(set.Order(), listed.Groups["values"].Value.Split(',', StringSplitOptions.TrimEntries).Order());
        }
    }

    [Fact]
    public void Readme_header_table_lists_exactly_the_bypass_reasons()
    {
        var readme = File.ReadAllText(RepositoryRoot.File("README.md"));
        var row = Regex.Match(readme, @"^\| `X-Rewrite-Bypass` \| (?<text>[^|]+) \|", RegexOptions.Multiline);
        Assert.True(row.Success, "README has no row for X-Rewrite-Bypass");
        var listed = Regex.Matches(row.Groups["text"].Value, "`(?<v>[a-z_]+)`").Select(m => m.Groups["v"].Value);
        Assert.Equal(LabelValue.All<BypassReason>().Order(), listed.Order());
    }

    [Fact]
    public void Prometheus_rules_and_their_tests_use_only_values_the_proxy_produces()
    {
        var folder = RepositoryRoot.File("config", "prometheus");
        var files = Directory.GetFiles(folder, "*.yml", SearchOption.AllDirectories);
        Assert.NotEmpty(files);
        var found = 0;
        foreach (var file in files)
            foreach (Match series in Regex.Matches(File.ReadAllText(file), @"(?<name>rewriteproxy_[a-z_]+)\{(?<labels>[^}]*)\}"))
            {
                var name = series.Groups["name"].Value;
                var family = SetsBySeries.Keys.FirstOrDefault(k => name == k || name.StartsWith(k + "_", StringComparison.Ordinal));
                if (family is null) continue;
                foreach (Match label in Regex.Matches(series.Groups["labels"].Value, @"(?:reason|result|verdict)\s*(?:=|!=)\s*""(?<value>[^""]+)"""))
                {
                    found++;
                    Assert.True(SetsBySeries[family].Contains(label.Groups["value"].Value),
                        $"{Path.GetFileName(file)}: {name} names '{label.Groups["value"].Value}', which the proxy never produces");
                }
            }
        Assert.True(found > 0, "no labelled series found in config/prometheus");
    }
}
