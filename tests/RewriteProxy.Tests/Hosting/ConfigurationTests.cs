using RewriteProxy.Lanes;
using System.Diagnostics;
using Microsoft.Extensions.Configuration;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Hosting;

public sealed class ConfigurationTests
{
    static (int Exit, string Stdout, string Stderr) RunProxy(params string[] args) => RunProxyWith(new(), args);

    /// <summary>Runs the real built binary, as an operator would, with a bounded wait.</summary>
    static (int Exit, string Stdout, string Stderr) RunProxyWith(Dictionary<string, string> env, params string[] args)
    {
        var start = new ProcessStartInfo("dotnet") { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false };
        start.ArgumentList.Add("exec");
        start.ArgumentList.Add(Path.Combine(AppContext.BaseDirectory, "rewriteproxy.dll"));
        foreach (var a in args) start.ArgumentList.Add(a);
        start.WorkingDirectory = Path.GetTempPath();
        foreach (var (k, v) in env) start.Environment[k] = v;
        using var process = Process.Start(start)!;
        var stdout = process.StandardOutput.ReadToEndAsync();
        var stderr = process.StandardError.ReadToEndAsync();
        if (!process.WaitForExit(30_000))
        {
            process.Kill(entireProcessTree: true);
            Assert.Fail("the proxy did not exit on a bad configuration");
        }
        return (process.ExitCode, stdout.Result, stderr.Result);
    }

    [Theory]
    [InlineData("--Upstream:BaseUrl=api.example.com/v1", "Upstream:BaseUrl = 'api.example.com/v1' is not allowed")]
    [InlineData("--Lanes:draft:MaxDrift=1.5x", "Lanes:draft:MaxDrift = '1.5x' is not a number")]
    [InlineData("--Lanes:siblings:HitSimilarity=1.2", "Lanes:siblings:HitSimilarity = 1.2 is outside the allowed range [0, 1]")]
    [InlineData("--Lanes:draft:Kind=summary", "Lanes:draft:Kind = 'summary' is not allowed; allowed: draft, siblings")]
    [InlineData("--Store:MaxEntries=-5", "Store:MaxEntries = -5 is not allowed; allowed: 1 or more")]
    [InlineData("--Upstream:Timeout=soon", "Upstream:Timeout = 'soon' is not a duration")]
    [InlineData("--Limits:IdleTrimAfter=-00:00:05", "Limits:IdleTrimAfter is negative; use 0 to turn the idle trim off")]
    [InlineData("--Store:Provider=mysql", "Store:Provider = 'mysql' is not allowed; allowed: sqlite, postgres")]
    [InlineData("--Store:Provider=postgres", "Store:ConnectionString is missing; Store:Provider = postgres needs")]
    public void A_bad_value_stops_the_process_with_one_clear_line(string argument, string expected)
    {
        var (exit, _, stderr) = RunProxy(argument, "--urls", "http://127.0.0.1:0");

        Assert.NotEqual(0, exit);
        var lines = stderr.Split('\n', StringSplitOptions.RemoveEmptyEntries);
        Assert.Single(lines);
        Assert.Contains(expected, lines[0]);
        Assert.DoesNotContain("   at ", stderr);
    }

    [Fact]
    public void The_store_connection_string_is_read_from_the_environment_and_never_printed()
    {
        const string secret = "Host=db.invalid;Username=rp;Password=s3cret-of-the-store";
        var (exit, stdout, stderr) = RunProxyWith(new()
        {
            ["REWRITEPROXY_Store__Provider"] = "postgres",
            ["REWRITEPROXY_Store__ConnectionString"] = secret,
        }, "--urls", "http://127.0.0.1:0");

        Assert.NotEqual(0, exit); // the store cannot be reached (or is not in this build): a start-up error
        Assert.Contains("store", stderr);
        Assert.DoesNotContain("s3cret-of-the-store", stdout + stderr);
        var options = OptionsReader.Read(new ConfigurationBuilder().AddInMemoryCollection(new Dictionary<string, string?>
        {
            ["Upstream:BaseUrl"] = "http://127.0.0.1:9/v1",
            ["Store:Provider"] = "postgres",
            ["Store:ConnectionString"] = secret,
        }).Build()).Options!;
        Assert.Equal(secret, options.Store.ConnectionString);
        Assert.DoesNotContain("s3cret-of-the-store", options.ToString());
    }

    [Fact]
    public void A_connection_string_npgsql_cannot_read_stops_the_process_naming_the_key_but_not_the_password()
    {
        var (exit, stdout, stderr) = RunProxyWith(new()
        {
            ["REWRITEPROXY_Store__Provider"] = "postgres",
            ["REWRITEPROXY_Store__ConnectionString"] = "Host=db.invalid;Password=s3cret-of-the-store;Frobnicate=yes",
        }, "--urls", "http://127.0.0.1:0");

        Assert.NotEqual(0, exit);
        var lines = stderr.Split('\n', StringSplitOptions.RemoveEmptyEntries);
        Assert.Single(lines);
        Assert.Contains("Store:ConnectionString: the PostgreSQL connection string cannot be read", lines[0]);
        Assert.DoesNotContain("s3cret-of-the-store", stdout + stderr);
    }

    [Theory]
    [InlineData(null, null, "data/rewriteproxy.db.index")]
    [InlineData(null, "/srv/cache.db", "/srv/cache.db.index")]
    [InlineData("", null, "")]
    [InlineData("/snapshots/index", null, "/snapshots/index")]
    public void The_index_snapshot_sits_beside_the_store_unless_set_and_empty_turns_it_off(string? snapshot, string? path, string expected)
    {
        var settings = new Dictionary<string, string?> { ["Upstream:BaseUrl"] = "http://127.0.0.1:9/v1" };
        if (snapshot is not null) settings["Store:IndexSnapshotPath"] = snapshot;
        if (path is not null) settings["Store:Path"] = path;

        var options = OptionsReader.Read(new ConfigurationBuilder().AddInMemoryCollection(settings).Build()).Options!;

        Assert.Equal(expected, options.Store.IndexSnapshotPath);
    }

    [Fact]
    public void Environment_variables_override_the_file_and_are_validated()
    {
        var (exit, _, stderr) = RunProxyWith(new() { ["REWRITEPROXY_Upstream__BaseUrl"] = "ftp://files.example/v1" }, "--urls", "http://127.0.0.1:0");

        Assert.Equal(2, exit);
        Assert.Contains("Upstream:BaseUrl = 'ftp://files.example/v1' is not allowed", stderr);
    }

    [Fact]
    public void A_missing_config_file_is_one_clear_line()
    {
        var (exit, _, stderr) = RunProxy("--config", "/nonexistent/rewriteproxy.json");
        Assert.Equal(2, exit);
        Assert.Equal("rewriteproxy: config: --config /nonexistent/rewriteproxy.json: the file does not exist", stderr.Trim());
    }

    [Fact]
    public void A_config_file_that_is_not_json_is_one_clear_line()
    {
        var file = Path.GetTempFileName();
        File.WriteAllText(file, "{ \"Upstream\": { \"BaseUrl\": ");
        try
        {
            var (exit, _, stderr) = RunProxy("--config", file);
            Assert.Equal(2, exit);
            Assert.Contains("not valid JSON", stderr);
            Assert.Single(stderr.Split('\n', StringSplitOptions.RemoveEmptyEntries));
        }
        finally { File.Delete(file); }
    }

    [Fact]
    public void Every_bad_value_is_reported_not_only_the_first()
    {
        var config = new ConfigurationBuilder().AddInMemoryCollection(new Dictionary<string, string?>
        {
            ["Upstream:BaseUrl"] = "/relative",
            ["Lanes:a:Kind"] = "siblings",
            ["Lanes:a:MinSpread"] = "-0.1",
            ["Lanes:b:Kind"] = "nope",
            ["Partition"] = "everyone",
        }).Build();
        var (options, errors) = OptionsReader.Read(config);

        Assert.Null(options);
        Assert.Equal(4, errors.Count);
    }

    [Fact]
    public void The_shipped_config_file_is_valid_and_has_one_lane_of_each_kind()
    {
        var file = Path.Combine(AppContext.BaseDirectory, "config", "rewriteproxy.json");
        var config = new ConfigurationBuilder().AddJsonFile(file).Build();
        var (options, errors) = OptionsReader.Read(config);

        Assert.Empty(errors);
        Assert.Contains(options!.Lanes.Values, l => l.Kind == LaneKind.Draft);
        Assert.Contains(options.Lanes.Values, l => l.Kind == LaneKind.Siblings);
    }

    [Fact]
    public void Partition_headers_read_from_an_array_or_one_comma_separated_value_and_a_bad_name_is_named()
    {
        static (RewriteProxyOptions? Options, IReadOnlyList<string> Errors) Read(Dictionary<string, string?> values)
        {
            values["Upstream:BaseUrl"] = "http://127.0.0.1:9/v1";
            return OptionsReader.Read(new ConfigurationBuilder().AddInMemoryCollection(values).Build());
        }

        var array = Read(new() { ["PartitionHeaders:0"] = "X-Tenant-Id", ["PartitionHeaders:1"] = "X-Org" });
        var commas = Read(new() { ["PartitionHeaders"] = "X-Tenant-Id, X-Org" });
        var none = Read(new());
        var bad = Read(new() { ["PartitionHeaders:0"] = "X Tenant" });

        Assert.Equal(["X-Tenant-Id", "X-Org"], array.Options!.Partition.Headers);
        Assert.Equal(["X-Tenant-Id", "X-Org"], commas.Options!.Partition.Headers);
        Assert.Empty(none.Options!.Partition.Headers);
        Assert.Equal(["Authorization", "api-key", "x-api-key"], none.Options.Partition.CredentialHeaders);
        Assert.Contains("PartitionHeaders: 'X Tenant' is not an HTTP header name", Assert.Single(bad.Errors));
    }

    [Theory]
    [InlineData("90s", 90)]
    [InlineData("5m", 300)]
    [InlineData("2h", 7200)]
    [InlineData("7d", 604800)]
    [InlineData("250ms", 0.25)]
    [InlineData("00:01:40", 100)]
    public void Durations_read_with_a_unit_or_as_a_timespan(string text, double seconds)
    {
        Assert.True(DurationText.TryParse(text, out var value));
        Assert.Equal(seconds, value.TotalSeconds, 6);
    }
}
