using System.Diagnostics;
using System.Net;
using System.Text;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>
/// The real, built proxy as a child process: <c>dotnet exec {test bin}/rewriteproxy.dll serve --urls ... --Key=value</c>,
/// with stdout and stderr captured. Used where the proxy must be killed for real (crash safety), where its resident
/// memory is measured (soak), or where its console log is read (credentials). Dispose kills the process it started,
/// by that process's own handle (its PID), never anything else.
/// </summary>
public sealed class ProxyProcess : IAsyncDisposable
{
    /// <summary>Model load plus store open on a busy two-core machine; the real start takes a few seconds.</summary>
    static readonly TimeSpan ReadyTimeout = TimeSpan.FromSeconds(90);
    static readonly TimeSpan PollDelay = TimeSpan.FromMilliseconds(100);
    /// <summary>Exit code of `serve` when it cannot listen (proxy/Cli/ServeCommand.cs ExitCodes.CannotListen).</summary>
    const int CannotListen = 3;

    readonly Process _process;
    readonly StringBuilder _log;
    readonly string _workingDirectory;

    public Uri Root { get; }
    public HttpClient Client { get; }
    public int Pid { get; }
    public string StorePath { get; }

    /// <summary>Everything the child wrote to stdout and stderr so far, interleaved as it came.</summary>
    public string Log => PromTools.Text(_log);

    public bool HasExited => _process.HasExited;

    ProxyProcess(Process process, StringBuilder log, Uri root, string storePath, string workingDirectory)
    {
        _process = process;
        _log = log;
        Root = root;
        StorePath = storePath;
        _workingDirectory = workingDirectory;
        Pid = process.Id;
        Client = new HttpClient { BaseAddress = root, Timeout = TimeSpan.FromSeconds(60) };
    }

    /// <summary>The proxy's own build output, copied beside the test binaries by the project reference.</summary>
    public static string ProxyDll => Path.Combine(AppContext.BaseDirectory, "rewriteproxy.dll");

    /// <param name="settings">configuration overrides, passed as <c>--Key=value</c> (the documented last source).</param>
    public static async Task<ProxyProcess> StartAsync(Uri upstream, string storePath, IDictionary<string, string>? settings = null)
    {
        return await LoopbackPort.StartAsync(
            port => Launch(upstream, storePath, settings, port),
            proxy => proxy.WaitUntilReadyAsync(),
            e => e is PortTakenException,
            "the proxy");
    }

    static ProxyProcess Launch(Uri upstream, string storePath, IDictionary<string, string>? settings, int port)
    {
        var root = new Uri($"http://127.0.0.1:{port}/");
        var args = new List<string>
        {
            "exec", ProxyDll, "serve", "--urls", root.ToString().TrimEnd('/'),
            $"--Upstream:BaseUrl={upstream}", $"--Store:Path={storePath}",
        };
        foreach (var (k, v) in settings ?? new Dictionary<string, string>()) args.Add($"--{k}={v}");
        // Not the repository root: the config file beside the binary is the one read, as in a deployment.
        var workingDirectory = Directory.CreateTempSubdirectory("rewriteproxy-proc-").FullName;
        var log = new StringBuilder();
        var process = PromTools.StartLogged(PromTools.StartInfo(DotnetHost(), args, workingDirectory), log);
        return new ProxyProcess(process, log, root, storePath, workingDirectory);
    }

    /// <summary>The dotnet host running the tests (dotnet test sets DOTNET_HOST_PATH), else the one on PATH.</summary>
    static string DotnetHost() =>
        Environment.GetEnvironmentVariable("DOTNET_HOST_PATH") is { Length: > 0 } host && File.Exists(host) ? host : "dotnet";

    async Task WaitUntilReadyAsync()
    {
        var watch = Stopwatch.StartNew();
        while (watch.Elapsed < ReadyTimeout)
        {
            if (_process.HasExited)
            {
                if (_process.ExitCode == CannotListen) throw new PortTakenException(Log);
                throw new InvalidOperationException($"the proxy exited with {_process.ExitCode}:\n{Log}");
            }
            try
            {
                using var response = await Client.GetAsync("/readyz");
                if (response.StatusCode == HttpStatusCode.OK) return;
            }
            catch (HttpRequestException)
            {
                // not listening yet
            }
            await Task.Delay(PollDelay);
        }
        throw new InvalidOperationException($"the proxy was not ready within {ReadyTimeout}:\n{Log}");
    }

    /// <summary>SIGKILL (Process.Kill on Unix): no shutdown code of the proxy runs. Waits until it is gone.</summary>
    public void Kill()
    {
        if (_process.HasExited) return;
        _process.Kill();
        _process.WaitForExit(10_000);
    }

    /// <summary>Resident set size of the child, from the VmRSS line of /proc/{pid}/status (proc(5)), in bytes.</summary>
    public long ResidentBytes()
    {
        foreach (var line in File.ReadLines($"/proc/{Pid}/status"))
            if (line.StartsWith("VmRSS:", StringComparison.Ordinal))
                return long.Parse(line["VmRSS:".Length..].Trim().Split(' ')[0]) * 1024; // proc(5): the value is in kB
        throw new InvalidOperationException($"/proc/{Pid}/status has no VmRSS line");
    }

    public async ValueTask DisposeAsync()
    {
        Client.Dispose();
        await ChildProcess.StopAsync(_process);
        try { Directory.Delete(_workingDirectory, recursive: true); } catch (IOException) { }
    }

    sealed class PortTakenException(string log) : Exception("the probed port was taken:\n" + log);
}
