// Stream fan-out benchmark for scripts/bench.sh, two roles in one program:
//
//   fanout upstream <listen-url> [events] [gap-ms]
//       A paced SSE upstream: every /v1/... call gets `events` chat.completion.chunk events, `gap-ms` apart, then
//       [DONE]. Each event carries the upstream's Stopwatch timestamp ("sent"); Stopwatch is CLOCK_MONOTONIC on Linux,
//       shared by every process on the machine, so the client can tell how long each event took to arrive.
//
//   fanout run --target name=url[,pid=N] ... [--streams 300] [--rounds 3] [--warmup-rounds 1] [--timeout-s 60] [--json file]
//       Opens `streams` new connections at once against each target, one round per target in turn (direct, nginx,
//       proxy, direct, ...), so every target sees the same machine state within a round. Warm-up rounds per target
//       first (JIT tiering, connection pools), printed but not in the JSON. Per round: time to first event (TTFB), gaps between events, arrival
//       lag, and the CPU time (utime + stime from /proc, children included: nginx's workers) of the middle process.
//
// Loopback only; every round is bounded by --timeout-s and the stream count; the program exits by itself.
using System.Diagnostics;
using System.Globalization;
using System.Text;
using System.Text.Json;

return args.Length > 0 && args[0] == "upstream" ? await Upstream.RunAsync(args[1..])
     : args.Length > 0 && args[0] == "run" ? await FanoutClient.RunAsync(args[1..])
     : Usage();

static int Usage()
{
    Console.Error.WriteLine("usage: fanout upstream <listen-url> [events=50] [gap-ms=20]\n" +
                            "       fanout run --target name=url[,pid=N] ... [--streams 300] [--rounds 3] [--timeout-s 60] [--json file]");
    return 2;
}

static class Upstream
{
    public static async Task<int> RunAsync(string[] args)
    {
        var url = args[0];
        int events = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 50;
        var gap = TimeSpan.FromMilliseconds(args.Length > 2 ? double.Parse(args[2], CultureInfo.InvariantCulture) : 20);

        var builder = WebApplication.CreateSlimBuilder();
        builder.Logging.ClearProviders();
        builder.WebHost.UseUrls(url);
        // 300 connections arrive at once: the default backlog (512) would do, but a proxy with its own pool may open more.
        builder.WebHost.UseSockets(o => o.Backlog = 4096);
        builder.WebHost.ConfigureKestrel(k => k.AddServerHeader = false);
        var app = builder.Build();
        var models = "{\"object\":\"list\",\"data\":[{\"id\":\"bench-model\",\"object\":\"model\"}]}"u8.ToArray();
        var done = "data: [DONE]\n\n"u8.ToArray();
        app.Run(async context =>
        {
            if (HttpMethods.IsGet(context.Request.Method))
            {
                context.Response.ContentType = "application/json";
                await context.Response.Body.WriteAsync(models);
                return;
            }
            await context.Request.Body.CopyToAsync(Stream.Null);
            context.Response.ContentType = "text/event-stream";
            context.Response.Headers.CacheControl = "no-cache";
            var ct = context.RequestAborted;
            long start = Stopwatch.GetTimestamp();
            var buffer = new byte[512];
            for (int k = 0; k < events; k++)
            {
                // Paced against the stream's start, not the previous event: a late event does not push the rest back.
                var due = TimeSpan.FromTicks(gap.Ticks * k) - Stopwatch.GetElapsedTime(start);
                if (due > TimeSpan.Zero) await Task.Delay(due, ct);
                int n = Chunk(buffer, k, k == events - 1, Stopwatch.GetTimestamp());
                await context.Response.Body.WriteAsync(buffer.AsMemory(0, n), ct);
                if (k == events - 1) await context.Response.Body.WriteAsync(done, ct);
                await context.Response.Body.FlushAsync(ct);
            }
        });
        await app.RunAsync();
        return 0;
    }

    /// <summary>One chat.completion.chunk event of a realistic size (~230 bytes) with its sequence number and send time.</summary>
    static int Chunk(byte[] buffer, int seq, bool last, long sent)
    {
        var text = last
            ? $"data: {{\"id\":\"chatcmpl-fanout\",\"object\":\"chat.completion.chunk\",\"created\":1767225600,\"model\":\"bench-model\",\"seq\":{seq},\"sent\":{sent},\"choices\":[{{\"index\":0,\"delta\":{{}},\"finish_reason\":\"stop\"}}]}}\n\n"
            : $"data: {{\"id\":\"chatcmpl-fanout\",\"object\":\"chat.completion.chunk\",\"created\":1767225600,\"model\":\"bench-model\",\"seq\":{seq},\"sent\":{sent},\"choices\":[{{\"index\":0,\"delta\":{{\"content\":\" word{seq}\"}},\"finish_reason\":null}}]}}\n\n";
        return Encoding.ASCII.GetBytes(text, buffer);
    }
}

sealed record Target(string Name, Uri Url, int? Pid);

sealed record StreamResult(bool Ok, string? Error, double TtfbMs, double[] GapsMs, double[] LagMs, bool Incremental, int Events);

sealed record RoundResult(string Target, int Round, int Streams, int Ok, int Incremental, double TtfbP50, double TtfbP99, double TtfbMax,
    double GapP50, double GapP99, double GapMax, double LagP50, double LagP99, double? CpuMs, double? RssMb, string LoadBefore, string LoadAfter,
    string? FirstError);

static class FanoutClient
{
    static readonly byte[] Body = Encoding.UTF8.GetBytes(
        "{\"model\":\"bench-model\",\"stream\":true,\"messages\":[{\"role\":\"system\",\"content\":\"Answer briefly.\"}," +
        "{\"role\":\"user\",\"content\":\"How long can I keep a shared bike before the overtime fee starts?\"}]}");

    public static async Task<int> RunAsync(string[] args)
    {
        var targets = new List<Target>();
        int streams = 300, rounds = 3, timeoutS = 60, warmupRounds = 1;
        string? json = null;
        for (int i = 0; i < args.Length; i++)
        {
            switch (args[i])
            {
                case "--target":
                    var parts = args[++i].Split(',');
                    var (name, url) = (parts[0][..parts[0].IndexOf('=')], parts[0][(parts[0].IndexOf('=') + 1)..]);
                    int? pid = parts.Skip(1).Where(p => p.StartsWith("pid=")).Select(p => (int?)int.Parse(p[4..])).FirstOrDefault();
                    targets.Add(new Target(name, new Uri(url), pid));
                    break;
                case "--streams": streams = int.Parse(args[++i]); break;
                case "--rounds": rounds = int.Parse(args[++i]); break;
                case "--warmup-rounds": warmupRounds = int.Parse(args[++i]); break;
                case "--timeout-s": timeoutS = int.Parse(args[++i]); break;
                case "--json": json = args[++i]; break;
                default: Console.Error.WriteLine($"fanout: unknown argument {args[i]}"); return 2;
            }
        }
        if (targets.Count == 0) { Console.Error.WriteLine("fanout: no --target"); return 2; }

        Console.WriteLine($"fan-out: {streams} new streams at once per round, {rounds} measured round(s) per target after {warmupRounds} warm-up round(s), " +
                          $"targets in turn: {string.Join(", ", targets.Select(t => t.Name))}");
        // Warm-up rounds are printed (round 0, -1, ...: the first one after start shows the cost of the JIT's tiering)
        // but left out of the JSON the ratios are computed from.
        for (int w = warmupRounds; w >= 1; w--)
            foreach (var t in targets) Print(await RoundAsync(t, 1 - w, streams, timeoutS));

        var results = new List<RoundResult>();
        bool failed = false;
        for (int r = 1; r <= rounds; r++)
        {
            foreach (var t in targets)
            {
                var res = await RoundAsync(t, r, streams, timeoutS);
                results.Add(res);
                Print(res);
                if (res.Ok != res.Streams || res.Incremental != res.Ok) failed = true;
            }
        }
        if (json is not null)
            await File.WriteAllTextAsync(json, JsonSerializer.Serialize(results, new JsonSerializerOptions { WriteIndented = true }));
        if (failed) Console.Error.WriteLine("fanout: some streams failed or were not incremental (see the rounds above)");
        return failed ? 1 : 0;
    }

    static void Print(RoundResult r) =>
        // InvariantGlobalization (csproj): numbers print with a '.' whatever the machine's locale.
        Console.WriteLine(
            $"  round {r.Round} {r.Target,-8} ok {r.Ok}/{r.Streams} incremental {r.Incremental}  TTFB p50 {r.TtfbP50,7:0.0} p99 {r.TtfbP99,7:0.0} max {r.TtfbMax,7:0.0} ms" +
            $"  gap p50 {r.GapP50,5:0.0} p99 {r.GapP99,6:0.0} max {r.GapMax,6:0.0} ms  lag p50 {r.LagP50,5:0.00} p99 {r.LagP99,6:0.0} ms" +
            $"  cpu {(r.CpuMs is { } c ? $"{c,6:0} ms" : "     -   ")}  rss {(r.RssMb is { } m ? $"{m,5:0} MB" : "   -   ")}  load {r.LoadBefore} -> {r.LoadAfter}" +
            (r.FirstError is null ? "" : $"  first error: {r.FirstError}"));

    static async Task<RoundResult> RoundAsync(Target target, int round, int streams, int timeoutS)
    {
        using var cts = new CancellationTokenSource(TimeSpan.FromSeconds(timeoutS));
        // A new handler per round: every stream opens a new connection, as 300 new clients would.
        using var handler = new SocketsHttpHandler { UseProxy = false, MaxConnectionsPerServer = int.MaxValue, PooledConnectionIdleTimeout = TimeSpan.FromSeconds(5) };
        using var client = new HttpClient(handler) { Timeout = Timeout.InfiniteTimeSpan };
        var gate = new TaskCompletionSource(TaskCreationOptions.RunContinuationsAsynchronously);
        var tasks = new Task<StreamResult>[streams];
        for (int i = 0; i < streams; i++) tasks[i] = OneAsync(client, target.Url, gate.Task, cts.Token);
        var load = LoadAverage();
        double? cpu0 = target.Pid is { } p0 ? CpuMs(p0) : null;
        gate.SetResult();
        var all = await Task.WhenAll(tasks);
        client.Dispose();
        // Connections close when the handler is disposed; give the middle process a moment to account for it.
        await Task.Delay(200);
        double? cpu = target.Pid is { } p1 ? CpuMs(p1) - cpu0 : null;
        double? rss = target.Pid is { } p2 ? RssMb(p2) : null;
        var ok = all.Where(s => s.Ok).ToArray();
        var ttfb = ok.Select(s => s.TtfbMs).Order().ToArray();
        var gaps = ok.SelectMany(s => s.GapsMs).Order().ToArray();
        var lag = ok.SelectMany(s => s.LagMs).Order().ToArray();
        return new RoundResult(target.Name, round, streams, ok.Length, ok.Count(s => s.Incremental),
            P(ttfb, 50), P(ttfb, 99), P(ttfb, 100), P(gaps, 50), P(gaps, 99), P(gaps, 100), P(lag, 50), P(lag, 99),
            cpu, rss, load, LoadAverage(), all.FirstOrDefault(s => !s.Ok)?.Error);
    }

    static async Task<StreamResult> OneAsync(HttpClient client, Uri url, Task gate, CancellationToken ct)
    {
        await gate;
        long t0 = Stopwatch.GetTimestamp();
        var recv = new List<long>(64);
        var sent = new List<long>(64);
        try
        {
            using var request = new HttpRequestMessage(HttpMethod.Post, url) { Content = new ByteArrayContent(Body) };
            request.Content.Headers.ContentType = new("application/json");
            request.Headers.Authorization = new("Bearer", "sk-bench-tenant");
            using var response = await client.SendAsync(request, HttpCompletionOption.ResponseHeadersRead, ct);
            if (!response.IsSuccessStatusCode) return Fail($"status {(int)response.StatusCode}");
            await using var body = await response.Content.ReadAsStreamAsync(ct);
            var buffer = new byte[16384];
            var pending = new List<byte>(1024);
            bool finished = false;
            while (!finished)
            {
                int n = await body.ReadAsync(buffer, ct);
                if (n == 0) break;
                long now = Stopwatch.GetTimestamp();
                // Events end with a blank line; an event split across reads is completed by the next read.
                pending.AddRange(buffer.AsSpan(0, n));
                int from = 0;
                for (int i = 0; i + 1 < pending.Count; i++)
                {
                    if (pending[i] != '\n' || pending[i + 1] != '\n') continue;
                    var ev = Encoding.ASCII.GetString(System.Runtime.InteropServices.CollectionsMarshal.AsSpan(pending)[from..i]);
                    from = i + 2;
                    i++;
                    if (ev.StartsWith("data: [DONE]", StringComparison.Ordinal)) { finished = true; break; }
                    int at = ev.IndexOf("\"sent\":", StringComparison.Ordinal);
                    if (at < 0) continue;
                    int end = at + 7;
                    while (end < ev.Length && char.IsAsciiDigit(ev[end])) end++;
                    sent.Add(long.Parse(ev.AsSpan(at + 7, end - at - 7), CultureInfo.InvariantCulture));
                    recv.Add(now);
                }
                pending.RemoveRange(0, from);
            }
            if (!finished || recv.Count == 0) return Fail($"stream ended after {recv.Count} events without [DONE]");
        }
        catch (Exception e) when (e is HttpRequestException or IOException or OperationCanceledException)
        {
            return Fail($"{e.GetType().Name}: {e.Message}");
        }
        double Ms(long ticks) => ticks * 1000.0 / Stopwatch.Frequency;
        var gaps = new double[recv.Count - 1];
        for (int i = 1; i < recv.Count; i++) gaps[i - 1] = Ms(recv[i] - recv[i - 1]);
        var lag = new double[recv.Count];
        for (int i = 0; i < recv.Count; i++) lag[i] = Ms(recv[i] - sent[i]);
        // Incremental: the first event reached the client before the upstream sent its last one.
        return new StreamResult(true, null, Ms(recv[0] - t0), gaps, lag, recv[0] < sent[^1], recv.Count);

        StreamResult Fail(string why) => new(false, why, 0, [], [], false, recv.Count);
    }

    static double P(double[] sorted, double pct) =>
        sorted.Length == 0 ? double.NaN : sorted[Math.Clamp((int)Math.Ceiling(pct / 100 * sorted.Length) - 1, 0, sorted.Length - 1)];

    static string LoadAverage() => File.ReadAllText("/proc/loadavg").Split(' ')[0];

    /// <summary>utime + stime of a process and its direct children (nginx's workers), in ms.</summary>
    static double CpuMs(int pid)
    {
        double ticks = 0;
        foreach (var p in WithChildren(pid))
        {
            try
            {
                var stat = File.ReadAllText($"/proc/{p}/stat");
                var fields = stat[(stat.LastIndexOf(')') + 2)..].Split(' ');
                // After "pid (comm) ": field 3 is state (index 0), so utime (14) and stime (15) are at 11 and 12.
                ticks += long.Parse(fields[11], CultureInfo.InvariantCulture) + long.Parse(fields[12], CultureInfo.InvariantCulture);
            }
            catch (IOException) { }
        }
        // USER_HZ is 100 on Linux (sysconf(_SC_CLK_TCK)); 10 ms per tick.
        return ticks * 10;
    }

    static double RssMb(int pid) =>
        WithChildren(pid).Sum(p =>
        {
            try
            {
                var line = File.ReadLines($"/proc/{p}/status").First(l => l.StartsWith("VmRSS:"));
                return double.Parse(line.Split(' ', StringSplitOptions.RemoveEmptyEntries)[1], CultureInfo.InvariantCulture) / 1024;
            }
            catch (IOException) { return 0; }
        });

    static IEnumerable<int> WithChildren(int pid)
    {
        yield return pid;
        var children = new List<int>();
        try
        {
            foreach (var task in Directory.EnumerateDirectories($"/proc/{pid}/task"))
                foreach (var c in File.ReadAllText(Path.Combine(task, "children")).Split(' ', StringSplitOptions.RemoveEmptyEntries))
                    children.Add(int.Parse(c, CultureInfo.InvariantCulture));
        }
        catch (IOException) { }
        foreach (var c in children) yield return c;
    }
}
