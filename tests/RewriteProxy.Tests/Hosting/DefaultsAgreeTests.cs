using System.Globalization;
using System.Text.RegularExpressions;
using Microsoft.Extensions.Configuration;
using RewriteProxy.Hosting;
using RewriteProxy.Lanes;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Hosting;

/// <summary>
/// Every default is written once, in its options record. README's configuration table and the shipped
/// config/rewriteproxy.json must say the same: read through OptionsReader, each gives what an absent key gives.
/// </summary>
public sealed class DefaultsAgreeTests
{
    /// <summary>Each documented key and how to read its value from the options; a lane key is read for both shipped lanes.</summary>
    static readonly Dictionary<string, Func<RewriteProxyOptions, LaneOptions?, object?>> Keys = new()
    {
        ["Upstream:Timeout"] = (o, _) => o.Upstream.Timeout,
        ["Store:Provider"] = (o, _) => o.Store.Provider,
        ["Store:Path"] = (o, _) => o.Store.Path,
        ["Store:ConnectionString"] = (o, _) => o.Store.ConnectionString,
        ["Store:IndexSnapshotPath"] = (o, _) => o.Store.IndexSnapshotPath,
        ["Store:MaxEntries"] = (o, _) => o.Store.MaxEntries,
        ["Store:Ttl"] = (o, _) => o.Store.Ttl,
        ["Store:ClaimWait"] = (o, _) => o.Store.ClaimWait,
        ["Store:IndexSnapshotInterval"] = (o, _) => o.Store.IndexSnapshotInterval,
        ["Embedding:ModelPath"] = (o, _) => o.Embedding.ModelPath,
        ["Embedding:VocabPath"] = (o, _) => o.Embedding.VocabPath,
        ["Embedding:Threads"] = (o, _) => o.Embedding.Threads,
        ["Embedding:MaxTokens"] = (o, _) => o.Embedding.MaxTokens,
        ["Embedding:CacheSize"] = (o, _) => o.Embedding.CacheSize,
        ["Lanes:{name}:HitSimilarity"] = (_, l) => l!.HitSimilarity,
        ["Lanes:{name}:MaxDrift"] = (_, l) => l!.MaxDrift,
        ["Lanes:{name}:MinSpread"] = (_, l) => l!.MinSpread,
        ["Lanes:{name}:MaxSiblings"] = (_, l) => l!.MaxSiblings,
        ["Lanes:{name}:MaxCandidates"] = (_, l) => l!.MaxCandidates,
        ["Lanes:{name}:Candidates"] = (_, l) => l!.Candidates,
        ["Lanes:{name}:OnDrift"] = (_, l) => l!.OnDrift,
        ["Lanes:{name}:Retries"] = (_, l) => l!.Retries,
        ["Lanes:{name}:Mode"] = (_, l) => l!.Mode,
        ["Lanes:{name}:QuestionPattern"] = (_, l) => l!.QuestionPattern?.ToString(),
        ["Partition"] = (o, _) => o.Partition.Mode,
        ["PartitionHeaders"] = (o, _) => o.Partition.Headers,
        ["Limits:MaxRequestBytes"] = (o, _) => o.Limits.MaxRequestBytes,
        ["Limits:MaxResponseBytes"] = (o, _) => o.Limits.MaxResponseBytes,
        ["Limits:MaxPassthroughBytes"] = (o, _) => o.Limits.MaxPassthroughBytes,
        ["Limits:IdleTrimAfter"] = (o, _) => o.Limits.IdleTrimAfter,
        ["Admin:Token"] = (o, _) => o.Admin.Token,
        ["Events:Enabled"] = (o, _) => o.Events.Enabled,
        ["Events:Retention"] = (o, _) => o.Events.Retention,
        ["Events:MaxRows"] = (o, _) => o.Events.MaxRows,
        ["Metrics:Port"] = (o, _) => o.Metrics.Port,
    };

    /// <summary>Keys with no default: the table says "(required)".</summary>
    static readonly string[] Required = ["Upstream:BaseUrl", "Lanes:{name}:Kind"];

    static readonly string[] ShippedLanes = ["draft", "siblings"];

    static RewriteProxyOptions Read(IDictionary<string, string?> settings)
    {
        var values = new Dictionary<string, string?>
        {
            ["Upstream:BaseUrl"] = "http://127.0.0.1:9/v1",
            ["Lanes:draft:Kind"] = "draft",
            ["Lanes:siblings:Kind"] = "siblings",
        };
        foreach (var (k, v) in settings) values[k] = v;
        var (options, errors) = OptionsReader.Read(new ConfigurationBuilder().AddInMemoryCollection(values).Build());
        return options ?? throw new InvalidOperationException(string.Join("\n", errors));
    }

    static readonly RewriteProxyOptions Defaults = Read(new Dictionary<string, string?>());

    /// <summary>One comparable text per value: lists joined, times in ticks, numbers round-trippable.</summary>
    static string Canonical(object? value) => value switch
    {
        null => "(none)",
        string s => s,
        TimeSpan t => t.Ticks.ToString(CultureInfo.InvariantCulture),
        double d => d.ToString("R", CultureInfo.InvariantCulture),
        IEnumerable<string> list => "[" + string.Join(",", list) + "]",
        IFormattable f => f.ToString(null, CultureInfo.InvariantCulture),
        _ => value.ToString() ?? "",
    };

    static IEnumerable<(string Key, string Lane, object? Value)> Values(RewriteProxyOptions options) =>
        Keys.SelectMany(k => k.Key.StartsWith("Lanes:{name}:", StringComparison.Ordinal)
            ? ShippedLanes.Select(lane => (k.Key, lane, k.Value(options, options.Lanes[lane])))
            : [(k.Key, "", k.Value(options, null))]);

    /// <summary>README's configuration table: key → default column.</summary>
    static Dictionary<string, string> ReadmeTable()
    {
        var readme = File.ReadAllText(RepositoryRoot.File("README.md"));
        var section = Regex.Match(readme, @"^## Configuration\n(?<body>.*?)^## ", RegexOptions.Singleline | RegexOptions.Multiline).Groups["body"].Value;
        return Regex.Matches(section, @"^\| `(?<key>[^`]+)` \| (?<default>[^|]+) \|", RegexOptions.Multiline)
            .Where(m => !m.Groups["key"].Value.StartsWith("Logging:", StringComparison.Ordinal))
            .ToDictionary(m => m.Groups["key"].Value, m => m.Groups["default"].Value.Trim());
    }

    [Fact]
    public void Readme_documents_every_key_and_no_other()
    {
        Assert.Equal(Keys.Keys.Concat(Required).Order(), ReadmeTable().Keys.Order());
    }

    [Fact]
    public void Readme_defaults_read_as_the_records_defaults()
    {
        foreach (var (key, text) in ReadmeTable())
        {
            if (Required.Contains(key))
            {
                Assert.Equal("(required)", text);
                continue;
            }
            foreach (var lane in key.StartsWith("Lanes:", StringComparison.Ordinal) ? ShippedLanes : [""])
            {
                // "`0.50` draft, `0.65` siblings" gives a value per lane kind; otherwise the first `value` is the default,
                // and a default without one ("(none)", "(embedded MiniLM)") must read as the key left out.
                var perLane = Regex.Match(text, $@"`(?<v>[^`]+)` {lane}\b");
                var plain = Regex.Match(text, "^`(?<v>[^`]+)`");
                var written = lane.Length > 0 && perLane.Success ? perLane.Groups["v"].Value : plain.Success ? plain.Groups["v"].Value : null;
                var configKey = key.Replace("{name}", lane);
                var settings = new Dictionary<string, string?>();
                if (written == "[]") settings[configKey] = "";
                else if (written is not null) settings[configKey] = written;
                var read = Keys[key](Read(settings), lane.Length > 0 ? Read(settings).Lanes[lane] : null);
                var expected = Keys[key](Defaults, lane.Length > 0 ? Defaults.Lanes[lane] : null);
                Assert.True(Canonical(expected) == Canonical(read),
                    $"README says {key} defaults to {text}; the options record says {Canonical(expected)} ({configKey})");
            }
        }
    }

    [Fact]
    public void Shipped_config_sets_the_records_defaults()
    {
        var shippedFile = RepositoryRoot.File(ConfigurationLoader.DefaultFile);
        var (shipped, errors) = OptionsReader.Read(ConfigurationLoader.Load(shippedFile, []));
        Assert.True(shipped is not null, string.Join("\n", errors));
        Assert.Equal(ShippedLanes, shipped.Lanes.Keys.Order());

        foreach (var ((key, lane, expected), (_, _, actual)) in Values(Defaults).Zip(Values(shipped)))
            Assert.True(Canonical(expected) == Canonical(actual),
                $"config/rewriteproxy.json sets {key.Replace("{name}", lane)} = {Canonical(actual)}; the options record's default is {Canonical(expected)}");
    }

    [Fact]
    public void Shipped_config_holds_only_documented_keys()
    {
        var shipped = ConfigurationLoader.Load(RepositoryRoot.File(ConfigurationLoader.DefaultFile), []);
        var documented = ReadmeTable().Keys.ToHashSet();
        var leaves = shipped.AsEnumerable()
            .Where(p => !p.Key.StartsWith("Logging", StringComparison.Ordinal) && shipped.GetSection(p.Key).GetChildren().Count() == 0)
            .Select(p => Regex.Replace(p.Key, "^Lanes:[^:]+:", "Lanes:{name}:"))
            .Select(k => Regex.Replace(k, @":\d+$", ""));
        Assert.All(leaves, k => Assert.Contains(k, documented));
    }
}
