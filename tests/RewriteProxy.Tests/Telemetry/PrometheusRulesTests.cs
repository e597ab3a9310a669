using System.Text.RegularExpressions;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Telemetry;

/// <summary>
/// The rule files in config/prometheus, judged by the Prometheus project's own promtool (Debian package
/// `prometheus`): `check rules` for syntax and PromQL, `test rules` for the unit tests in config/prometheus/tests.
/// </summary>
public sealed class PrometheusRulesTests
{
    static string ConfigDir => PromTools.PrometheusConfigDirectory;

    static string[] RuleFiles => [Path.Combine(ConfigDir, "recording.rules.yml"), Path.Combine(ConfigDir, "alerts.rules.yml")];

    static string[] RuleTestFiles(string configDir)
    {
        var files = Directory.GetFiles(Path.Combine(configDir, "tests"), "*.test.yml");
        Array.Sort(files, StringComparer.Ordinal);
        Assert.NotEmpty(files);
        return files;
    }

    [Fact]
    public void Recording_and_alert_rule_files_pass_promtool_check_rules()
    {
        // promtool check rules: parses every expression with the server's own PromQL parser.
        var (exit, output) = PromTools.Run(PromTools.PromtoolPath, ["check", "rules", .. RuleFiles]);

        Assert.True(exit == 0, output);
        Assert.Equal(RuleFiles.Length, Regex.Matches(output, @"SUCCESS: \d+ rules found").Count);
        Assert.DoesNotContain("FAILED", output);
    }

    [Theory]
    [InlineData("prometheus.example.yml")]
    // The Prometheus of config/replicas/compose.yaml: one scrape target per replica through DNS service discovery.
    [InlineData("prometheus.replicas.yml")]
    public void Shipped_scrape_configs_pass_promtool_check_config(string file)
    {
        // promtool check config also checks the rule files the config names, so the relative paths must resolve.
        var (exit, output) = PromTools.Run(PromTools.PromtoolPath, "check", "config", Path.Combine(ConfigDir, file));

        Assert.True(exit == 0, output);
        Assert.Contains("2 rule files found", output);
        Assert.DoesNotContain("FAILED", output);
    }

    [Fact]
    public void Rule_unit_tests_pass_under_promtool_test_rules()
    {
        var files = RuleTestFiles(ConfigDir);

        var (exit, output) = PromTools.Run(PromTools.PromtoolPath, ["test", "rules", .. files]);

        Assert.True(exit == 0, output);
        // promtool prints one "SUCCESS" per test file that passed.
        Assert.Equal(files.Length, Regex.Matches(output, @"^\s*SUCCESS\s*$", RegexOptions.Multiline).Count);
    }

    [Fact]
    public void Rule_test_with_a_wrong_expected_value_fails_under_promtool()
    {
        // Proves the harness can fail: the hit ratio with bypass in the denominator would be 0.375, not 0.75.
        using var copy = new ConfigCopy();
        copy.Replace(Path.Combine("tests", "hit_ratio.test.yml"), "value: 0.75", "value: 0.375");

        var (exit, output) = PromTools.Run(PromTools.PromtoolPath, ["test", "rules", .. RuleTestFiles(copy.Root)]);

        Assert.NotEqual(0, exit);
        Assert.Contains("FAILED", output);
        Assert.Contains("lane:rewriteproxy_hit_ratio:rate5m", output);
    }

    [Theory]
    // Each loosened threshold must turn an expected firing into silence, or a silent case into a firing.
    // Only the test file that covers the alert is run, to spare the shared CPU.
    [InlineData("0.9 * lane:rewriteproxy_lane_max_drift:min", "0.99 * lane:rewriteproxy_lane_max_drift:min", "RewriteProxyDriftNearMaxDrift", "guard")]
    [InlineData("lane:rewriteproxy_drop_ratio:rate5m > 0.25", "lane:rewriteproxy_drop_ratio:rate5m > 0.15", "RewriteProxyDropRatioHigh", "guard")]
    [InlineData("< 0.5 * (lane:rewriteproxy_hit_ratio:rate5m offset 1d)", "< 0.8 * (lane:rewriteproxy_hit_ratio:rate5m offset 1d)", "RewriteProxyHitRatioCollapsed", "hit_ratio")]
    [InlineData("lane:rewriteproxy_upstream_error_ratio:rate5m > 0.05", "lane:rewriteproxy_upstream_error_ratio:rate5m > 0.1", "RewriteProxyUpstreamErrorRatioHigh", "upstream_failopen")]
    [InlineData("and on (instance, job) (up offset 5m)", "", "RewriteProxyFailOpen", "upstream_failopen")]
    [InlineData("lane:rewriteproxy_question_unlocated_ratio:rate5m > 0.2", "lane:rewriteproxy_question_unlocated_ratio:rate5m > 0.6", "RewriteProxyQuestionUnlocated", "question")]
    public void Rule_tests_catch_a_changed_alert_threshold(string original, string changed, string alert, string testFile)
    {
        using var copy = new ConfigCopy();
        copy.Replace("alerts.rules.yml", original, changed);

        var (exit, output) = PromTools.Run(PromTools.PromtoolPath, "test", "rules", Path.Combine(copy.Root, "tests", $"{testFile}.test.yml"));

        Assert.NotEqual(0, exit);
        Assert.Contains($"alertname: {alert}", output);
    }

    [Fact]
    public void Every_alert_has_a_firing_and_a_silent_promtool_case()
    {
        var tests = string.Join("\n", RuleTestFiles(ConfigDir).Select(File.ReadAllText));

        foreach (var alert in AlertNames())
        {
            var name = Regex.Escape(alert);
            Assert.True(Regex.IsMatch(tests, $@"alertname: {name}\n\s+exp_alerts: \[\]"), $"{alert}: no case where it must stay silent");
            Assert.True(Regex.IsMatch(tests, $@"alertname: {name}\n\s+exp_alerts:\n\s+- exp_labels:"), $"{alert}: no case where it fires");
        }
    }

    [Fact]
    public void Every_alert_has_a_wait_a_severity_annotations_and_a_runbook_section()
    {
        var rules = File.ReadAllText(RuleFiles[1]);
        var runbook = File.ReadAllText(RepositoryRoot.File("README.md"));
        var blocks = Regex.Split(rules, @"(?=^\s+- alert: )", RegexOptions.Multiline).Where(b => b.TrimStart().StartsWith("- alert:"));

        foreach (var block in blocks)
        {
            var alert = Regex.Match(block, @"- alert: (\S+)").Groups[1].Value;
            Assert.Matches(@"\n\s+for: \d+[smh]\n", block);
            Assert.Matches(@"\n\s+severity: (critical|warning|info)\n", block);
            Assert.Matches(@"\n\s+summary: ", block);
            Assert.Matches(@"\n\s+description: ", block);
            // GitHub's heading anchor for "### Runbook: Name" is "runbook-" + the name in lower case.
            Assert.Contains($"runbook_url: \"README.md#runbook-{alert.ToLowerInvariant()}\"", block);
            Assert.Contains($"### Runbook: {alert}\n", runbook);
        }
        Assert.Equal(AlertNames().Count, blocks.Count());
    }

    static List<string> AlertNames() =>
        Regex.Matches(File.ReadAllText(RuleFiles[1]), @"^\s+- alert: (\S+)", RegexOptions.Multiline)
            .Select(m => m.Groups[1].Value).ToList();

    /// <summary>A throw-away copy of config/prometheus (rules and their tests) to break on purpose.</summary>
    sealed class ConfigCopy : IDisposable
    {
        public string Root { get; } = Directory.CreateTempSubdirectory("rewriteproxy-rules-").FullName;

        public ConfigCopy()
        {
            Directory.CreateDirectory(Path.Combine(Root, "tests"));
            foreach (var file in Directory.GetFiles(ConfigDir, "*.yml"))
                File.Copy(file, Path.Combine(Root, Path.GetFileName(file)));
            foreach (var file in Directory.GetFiles(Path.Combine(ConfigDir, "tests"), "*.yml"))
                File.Copy(file, Path.Combine(Root, "tests", Path.GetFileName(file)));
        }

        public void Replace(string relativePath, string original, string changed)
        {
            var path = Path.Combine(Root, relativePath);
            var text = File.ReadAllText(path);
            // Guards against a mutation that silently changes nothing once the files are edited.
            Assert.Contains(original, text);
            File.WriteAllText(path, text.Replace(original, changed));
        }

        public void Dispose() => Directory.Delete(Root, recursive: true);
    }
}
