using System.Diagnostics;
using System.Globalization;
using System.Net;
using System.Text;
using System.Text.Json;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>
/// Finds and runs the Prometheus project's own tools: <c>promtool</c> and the <c>prometheus</c> server, as shipped
/// by the Debian package <c>prometheus</c> (/usr/bin/promtool, /usr/bin/prometheus). scripts/test.sh installs it.
/// A missing tool is a test failure that says how to get it, never a silent skip.
/// </summary>
public static class PromTools
{
    /// <summary>Longest a single tool run may take; promtool on our rule tests needs a few seconds.</summary>
    public static readonly TimeSpan DefaultTimeout = TimeSpan.FromSeconds(120);

    const string InstallHint =
        "Run scripts/test.sh, which installs the Debian package 'prometheus' (or: apt-get update && apt-get install -y prometheus).";

    public static string PromtoolPath => Find("promtool");

    public static string PrometheusPath => Find("prometheus");

    /// <summary>config/prometheus: the rule files, their promtool tests and the example scrape config.</summary>
    public static string PrometheusConfigDirectory => RepositoryRoot.File("config", "prometheus");

    static string Find(string name)
    {
        var dirs = (Environment.GetEnvironmentVariable("PATH") ?? "").Split(Path.PathSeparator, StringSplitOptions.RemoveEmptyEntries)
            .Append("/usr/bin");
        foreach (var dir in dirs)
        {
            var candidate = Path.Combine(dir, name);
            if (File.Exists(candidate))
                return candidate;
        }
        throw new InvalidOperationException($"'{name}' (the Prometheus project's tool) was not found on PATH. {InstallHint}");
    }

    public static (int Exit, string Output) Run(string exe, params string[] args) => Run(exe, DefaultTimeout, args);

    /// <summary>Runs a tool to its end and returns its exit code with stdout and stderr interleaved as they came.</summary>
    /// <exception cref="TimeoutException">The tool ran longer than <paramref name="timeout"/>; it is killed.</exception>
    public static (int Exit, string Output) Run(string exe, TimeSpan timeout, params string[] args)
    {
        var output = new StringBuilder();
        using var process = StartLogged(StartInfo(exe, args), output);
        if (!process.WaitForExit(timeout))
        {
            process.Kill(entireProcessTree: true);
            process.WaitForExit();
            throw new TimeoutException($"{Path.GetFileName(exe)} {string.Join(' ', args)} ran over {timeout}:\n{Text(output)}");
        }
        process.WaitForExit(); // drains the redirected streams
        return (process.ExitCode, Text(output));
    }

    internal static ProcessStartInfo StartInfo(string exe, IEnumerable<string> args, string? workingDirectory = null)
    {
        var info = new ProcessStartInfo(exe)
        {
            RedirectStandardOutput = true,
            RedirectStandardError = true,
            UseShellExecute = false,
            WorkingDirectory = workingDirectory ?? Environment.CurrentDirectory,
        };
        foreach (var arg in args)
            info.ArgumentList.Add(arg);
        return info;
    }

    /// <summary>Starts a process with stdout and stderr collected, interleaved as they come, into <paramref name="log"/>.</summary>
    internal static Process StartLogged(ProcessStartInfo info, StringBuilder log)
    {
        var process = new Process { StartInfo = info };
        process.OutputDataReceived += (_, e) => Append(log, e.Data);
        process.ErrorDataReceived += (_, e) => Append(log, e.Data);
        process.Start();
        process.BeginOutputReadLine();
        process.BeginErrorReadLine();
        return process;
    }

    internal static void Append(StringBuilder output, string? line)
    {
        if (line is null) return;
        lock (output) output.AppendLine(line);
    }

    internal static string Text(StringBuilder output)
    {
        lock (output) return output.ToString();
    }
}

/// <summary>
/// A real Prometheus server (the Debian package's /usr/bin/prometheus) on 127.0.0.1 and a free port, with its own
/// temporary data folder, scraping one target every second and evaluating the given rule files every second.
/// Dispose kills the process this object started (by its PID) and deletes the folder.
/// </summary>
public sealed class PrometheusServer : IAsyncDisposable
{
    /// <summary>Scrape and rule evaluation period: short so that tests see data within seconds.</summary>
    public static readonly TimeSpan Interval = TimeSpan.FromSeconds(1);

    static readonly TimeSpan ReadyTimeout = TimeSpan.FromSeconds(20);
    static readonly TimeSpan PollDelay = TimeSpan.FromMilliseconds(200);

    readonly Process _process;
    readonly StringBuilder _log;
    readonly string _directory;
    readonly HttpClient _http;

    PrometheusServer(Process process, StringBuilder log, string directory, Uri baseAddress)
    {
        _process = process;
        _log = log;
        _directory = directory;
        BaseAddress = baseAddress;
        _http = new HttpClient { BaseAddress = baseAddress, Timeout = TimeSpan.FromSeconds(10) };
    }

    public Uri BaseAddress { get; }

    public int ProcessId => _process.Id;

    /// <summary>What the server logged so far, for failure messages.</summary>
    public string Log => PromTools.Text(_log);

    /// <param name="scrapeTarget">host:port serving /metrics, scraped as job "rewriteproxy".</param>
    /// <param name="ruleFiles">rule files to load (absolute paths or relative to the current folder).</param>
    public static async Task<PrometheusServer> StartAsync(string scrapeTarget, IEnumerable<string>? ruleFiles = null,
        CancellationToken cancellationToken = default)
    {
        var exe = PromTools.PrometheusPath;
        var rules = (ruleFiles ?? []).Select(Path.GetFullPath).ToArray();
        return await LoopbackPort.StartAsync(
            port => Launch(exe, Directory.CreateTempSubdirectory("rewriteproxy-prom-").FullName, port, scrapeTarget, rules),
            server => server.WaitUntilReadyAsync(cancellationToken),
            e => e is InvalidOperationException && !cancellationToken.IsCancellationRequested,
            "prometheus");
    }

    static PrometheusServer Launch(string exe, string directory, int port, string scrapeTarget, string[] rules)
    {
        var config = Path.Combine(directory, "prometheus.yml");
        File.WriteAllText(config, ConfigYaml(scrapeTarget, rules));
        var listen = $"127.0.0.1:{port}";
        var log = new StringBuilder();
        var process = PromTools.StartLogged(PromTools.StartInfo(exe,
            [
                $"--config.file={config}",
                $"--storage.tsdb.path={Path.Combine(directory, "data")}",
                $"--web.listen-address={listen}",
            ], directory), log);
        return new PrometheusServer(process, log, directory, new Uri($"http://{listen}/"));
    }

    static string ConfigYaml(string scrapeTarget, string[] rules)
    {
        var yaml = new StringBuilder();
        var seconds = $"{Interval.TotalSeconds.ToString(CultureInfo.InvariantCulture)}s";
        yaml.AppendLine("global:");
        yaml.AppendLine($"  scrape_interval: {seconds}");
        yaml.AppendLine($"  scrape_timeout: {seconds}"); // the 10s default would exceed the interval
        yaml.AppendLine($"  evaluation_interval: {seconds}");
        yaml.AppendLine("rule_files:" + (rules.Length == 0 ? " []" : ""));
        foreach (var rule in rules)
            yaml.AppendLine($"  - {JsonSerializer.Serialize(rule)}"); // a JSON string is a valid YAML scalar
        yaml.AppendLine("scrape_configs:");
        yaml.AppendLine("  - job_name: rewriteproxy");
        yaml.AppendLine("    static_configs:");
        yaml.AppendLine($"      - targets: [{JsonSerializer.Serialize(scrapeTarget)}]");
        return yaml.ToString();
    }

    async Task WaitUntilReadyAsync(CancellationToken cancellationToken)
    {
        using var deadline = CancellationTokenSource.CreateLinkedTokenSource(cancellationToken);
        deadline.CancelAfter(ReadyTimeout);
        while (true)
        {
            if (_process.HasExited)
                throw new InvalidOperationException($"prometheus exited with {_process.ExitCode}:\n{Log}");
            try
            {
                using var response = await _http.GetAsync("-/ready", deadline.Token);
                if (response.StatusCode == HttpStatusCode.OK)
                    return;
            }
            catch (HttpRequestException)
            {
                // not listening yet
            }
            catch (OperationCanceledException) when (deadline.IsCancellationRequested && !cancellationToken.IsCancellationRequested)
            {
                throw new InvalidOperationException($"prometheus was not ready within {ReadyTimeout}:\n{Log}");
            }
            try
            {
                await Task.Delay(PollDelay, deadline.Token);
            }
            catch (OperationCanceledException) when (!cancellationToken.IsCancellationRequested)
            {
                throw new InvalidOperationException($"prometheus was not ready within {ReadyTimeout}:\n{Log}");
            }
        }
    }

    /// <summary>
    /// Evaluates an instant query through /api/v1/query. Returns null when the result is an empty vector, the value
    /// of a scalar or of a one-sample vector, and throws when the vector has more than one sample (ambiguous).
    /// </summary>
    public async Task<double?> QueryScalarAsync(string promql, CancellationToken cancellationToken = default)
    {
        using var response = await _http.GetAsync($"api/v1/query?query={Uri.EscapeDataString(promql)}", cancellationToken);
        var body = await response.Content.ReadAsStringAsync(cancellationToken);
        using var json = JsonDocument.Parse(body);
        var root = json.RootElement;
        if (root.GetProperty("status").GetString() != "success")
            throw new InvalidOperationException($"Query '{promql}' failed: {body}");
        var data = root.GetProperty("data");
        var result = data.GetProperty("result");
        switch (data.GetProperty("resultType").GetString())
        {
            case "scalar":
                return ParseValue(result[1].GetString()!);
            case "vector":
                return result.GetArrayLength() switch
                {
                    0 => null,
                    1 => ParseValue(result[0].GetProperty("value")[1].GetString()!),
                    _ => throw new InvalidOperationException($"Query '{promql}' returned {result.GetArrayLength()} samples: {body}"),
                };
            default:
                throw new InvalidOperationException($"Query '{promql}' returned no scalar or vector: {body}");
        }
    }

    /// <summary>Polls <see cref="QueryScalarAsync"/> until it yields a value; null if none came before the token ends.</summary>
    public async Task<double?> WaitForValueAsync(string promql, CancellationToken cancellationToken)
    {
        while (!cancellationToken.IsCancellationRequested)
        {
            var value = await QueryScalarAsync(promql, cancellationToken);
            if (value is not null)
                return value;
            try
            {
                await Task.Delay(PollDelay, cancellationToken);
            }
            catch (OperationCanceledException)
            {
                break;
            }
        }
        return null;
    }

    // The HTTP API writes sample values as strings, with Prometheus' spelling of the special values.
    static double ParseValue(string text) => text switch
    {
        "+Inf" => double.PositiveInfinity,
        "-Inf" => double.NegativeInfinity,
        "NaN" => double.NaN,
        _ => double.Parse(text, NumberStyles.Float, CultureInfo.InvariantCulture),
    };

    public async ValueTask DisposeAsync()
    {
        _http.Dispose();
        await ChildProcess.StopAsync(_process);
        try
        {
            Directory.Delete(_directory, recursive: true);
        }
        catch (IOException)
        {
            // a straggling file handle; the folder is under the system temp folder
        }
    }
}
