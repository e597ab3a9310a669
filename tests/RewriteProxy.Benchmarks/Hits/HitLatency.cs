using System.Diagnostics;
using System.Globalization;
using System.Net.Http.Headers;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.ML.OnnxRuntime;
using RewriteProxy.Embedding;

namespace RewriteProxy.Benchmarks.Hits;

/// <summary>
/// Hit latency of a running proxy process (the real <c>rewriteproxy serve</c>, as scripts/bench.sh starts it) against the
/// bare model run on the same question, in one process and one run:
/// <code>dotnet RewriteProxy.Benchmarks.dll hit-latency --url http://127.0.0.1:18093 [--calls 300] [--blocks 5] [--json file]</code>
/// Cases run in alternating blocks (bare runs, semantic hit, exact hit, empty round trip, then again), so a
/// change in the machine's load during the run falls on every case alike. Calls are sequential on one kept-alive
/// connection, so nothing queues: each figure is the cost of one call. The proxy must run with
/// <c>--Embedding:CacheSize=0</c> so that each semantic hit runs the model, as a paraphrase never seen before does.
/// </summary>
public static class HitLatency
{
    // Invented scenario: a fictional city's bike-share handbook (the same question as HitBenchmarks and bench.sh).
    const string Question = "How long can I keep a shared bike before the overtime fee starts?";
    const string Paraphrase = "How long may I keep a shared bike before the overtime fee begins?";

    // bare-2-threads: ORT's defaults with every core (its threads spin between parallel sections): the floor the target
    // names. bare-2-threads-proxy: the proxy's own session settings (OnnxEmbedder.SetThreadWaiting: threads that sleep).
    // bare-2-threads-proxy-after-call: the same run right after an untimed exact hit on the proxy, as a served semantic
    // hit's run comes right after request handling; only the run is timed. bare-1-thread: one core.
    static readonly string[] Cases =
        ["bare-2-threads", "bare-2-threads-proxy", "bare-2-threads-proxy-after-call", "bare-1-thread", "semantic-hit", "exact-hit", "round-trip"];

    public static async Task<int> RunAsync(string[] args)
    {
        Uri? url = null, bUrl = null;
        int calls = 300, blocks = 5;
        string? json = null, lane = "draft";
        for (int i = 0; i < args.Length; i++)
        {
            switch (args[i])
            {
                case "--url": url = new Uri(args[++i]); break;
                case "--b-url": bUrl = new Uri(args[++i]); break;
                case "--calls": calls = int.Parse(args[++i], CultureInfo.InvariantCulture); break;
                case "--blocks": blocks = int.Parse(args[++i], CultureInfo.InvariantCulture); break;
                case "--json": json = args[++i]; break;
                case "--lane": lane = args[++i]; break;
                default: Console.Error.WriteLine($"hit-latency: unknown argument {args[i]}"); return 2;
            }
        }
        if (url is null) { Console.Error.WriteLine("hit-latency: --url is required"); return 2; }

        using var client = new HttpClient { BaseAddress = url };
        // A second proxy (another build or setting) measured in the same blocks, for a before/after in one run.
        using var bClient = bUrl is null ? null : new HttpClient { BaseAddress = bUrl };
        byte[] questionBody = Body(Question), paraphraseBody = Body(Paraphrase);
        string lanePath = $"/lane/{lane}/v1/chat/completions";
        // Seeds the entry: the first call is a miss (stored), the same question is then an exact hit and the paraphrase
        // a semantic one. Anything else means the figures below would time the wrong path.
        foreach (var c in bClient is null ? [client] : new[] { client, bClient })
        {
            await ExpectAsync(c, lanePath, questionBody, "miss", "hit-exact");
            await ExpectAsync(c, lanePath, questionBody, "hit-exact");
            await ExpectAsync(c, lanePath, paraphraseBody, "hit-semantic");
        }
        string[] cases = bClient is null ? Cases : [.. Cases, "semantic-hit-b", "exact-hit-b"];

        EmbeddingModelSource source = EmbeddingModelSource.Packaged();
        // The proxy's session settings (OnnxEmbedder.Load) with all cores, and with one thread.
        using var bare2 = Session(source, Environment.ProcessorCount);
        using var bare2Proxy = Session(source, Environment.ProcessorCount, OnnxEmbedder.SetThreadWaiting);
        using var bare1 = Session(source, 1);
        var encoder = WordPieceEncoder.Load(new MemoryStream(source.Vocabulary), "vocab.txt", 256);
        string[] inputNames = bare2.InputMetadata.Keys.ToArray();
        string[] outputNames = ["last_hidden_state"];
        OrtValue[] input = Prepare(inputNames, encoder.Encode(Paraphrase)!);
        using var runOptions = new RunOptions();

        Func<Task> Call(string name) => name switch
        {
            "bare-2-threads" => () => { using var o = bare2.Run(runOptions, inputNames, input, outputNames); return Task.CompletedTask; },
            "bare-2-threads-proxy" or "bare-2-threads-proxy-after-call" =>
                () => { using var o = bare2Proxy.Run(runOptions, inputNames, input, outputNames); return Task.CompletedTask; },
            "bare-1-thread" => () => { using var o = bare1.Run(runOptions, inputNames, input, outputNames); return Task.CompletedTask; },
            "semantic-hit" => () => PostAsync(client, lanePath, paraphraseBody),
            "exact-hit" => () => PostAsync(client, lanePath, questionBody),
            "semantic-hit-b" => () => PostAsync(bClient!, lanePath, paraphraseBody),
            "exact-hit-b" => () => PostAsync(bClient!, lanePath, questionBody),
            _ => () => GetAsync(client, "/healthz"),
        };

        Func<Task>? Before(string name) => name == "bare-2-threads-proxy-after-call" ? () => PostAsync(client, lanePath, questionBody) : null;

        var times = cases.ToDictionary(c => c, _ => new List<double>());
        string loadBefore = Load();
        Console.WriteLine($"hit latency: {blocks} blocks x {calls} sequential calls per case, one kept-alive connection; warm-up {calls / 5} calls per case");
        foreach (var name in cases)
        {
            var call = Call(name);
            for (int i = 0; i < calls / 5; i++) await call();
        }
        for (int b = 0; b < blocks; b++)
        {
            foreach (var name in cases)
            {
                var call = Call(name);
                var block = new List<double>(calls);
                var before = Before(name);
                for (int i = 0; i < calls; i++)
                {
                    if (before is not null) await before();
                    long t0 = Stopwatch.GetTimestamp();
                    await call();
                    block.Add(Stopwatch.GetElapsedTime(t0).TotalMilliseconds);
                }
                times[name].AddRange(block);
                block.Sort();
                Console.WriteLine($"  block {b + 1} {name,-15} p50 {P(block, 50),7:0.000} ms  p99 {P(block, 99),7:0.000} ms   load {Load()}");
            }
        }
        string loadAfter = Load();
        foreach (var value in input) value.Dispose();

        var summary = new JsonObject { ["load_before"] = loadBefore, ["load_after"] = loadAfter, ["calls_per_case"] = calls * blocks };
        Console.WriteLine();
        Console.WriteLine("| case | p50 ms | p90 ms | p99 ms |");
        Console.WriteLine("| --- | ---: | ---: | ---: |");
        foreach (var name in cases)
        {
            var all = times[name];
            all.Sort();
            summary[name] = new JsonObject { ["p50"] = P(all, 50), ["p90"] = P(all, 90), ["p99"] = P(all, 99) };
            Console.WriteLine($"| {name} | {P(all, 50):0.000} | {P(all, 90):0.000} | {P(all, 99):0.000} |");
        }
        Console.WriteLine($"load {loadBefore} -> {loadAfter}");
        if (json is not null) await File.WriteAllTextAsync(json, summary.ToJsonString(new JsonSerializerOptions { WriteIndented = true }));
        return 0;
    }

    internal static InferenceSession Session(EmbeddingModelSource source, int threads,
        Action<Microsoft.ML.OnnxRuntime.SessionOptions>? waiting = null)
    {
        var options = new Microsoft.ML.OnnxRuntime.SessionOptions
        {
            GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            IntraOpNumThreads = threads,
            InterOpNumThreads = 1,
        };
        waiting?.Invoke(options);
        return new InferenceSession(source.Model, options);
    }

    internal static OrtValue[] Prepare(string[] inputNames, IReadOnlyList<int> pieces)
    {
        var ids = pieces.Select(p => (long)p).ToArray();
        long[] shape = [1, ids.Length];
        return inputNames.Select(name => name switch
        {
            "input_ids" => OrtValue.CreateTensorValueFromMemory(ids, shape),
            "attention_mask" => OrtValue.CreateTensorValueFromMemory(Enumerable.Repeat(1L, ids.Length).ToArray(), shape),
            _ => OrtValue.CreateTensorValueFromMemory(new long[ids.Length], shape),
        }).ToArray();
    }

    static byte[] Body(string question) => Encoding.UTF8.GetBytes(new JsonObject
    {
        ["model"] = "bench-model",
        ["temperature"] = 0,
        ["messages"] = new JsonArray(
            new JsonObject { ["role"] = "system", ["content"] = "Write a short passage that answers the question." },
            new JsonObject { ["role"] = "user", ["content"] = question }),
    }.ToJsonString());

    static async Task<string> PostAsync(HttpClient client, string path, byte[] body)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, path)
        {
            Content = new ByteArrayContent(body) { Headers = { ContentType = new MediaTypeHeaderValue("application/json") } },
        };
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", "sk-bench-tenant");
        using var response = await client.SendAsync(request);
        await response.Content.ReadAsByteArrayAsync();
        if (!response.IsSuccessStatusCode) throw new InvalidOperationException($"lane call answered {(int)response.StatusCode}");
        return response.Headers.TryGetValues("X-Rewrite-Cache", out var values) ? values.First() : "";
    }

    static async Task GetAsync(HttpClient client, string path)
    {
        using var response = await client.GetAsync(path);
        await response.Content.ReadAsByteArrayAsync();
    }

    static async Task ExpectAsync(HttpClient client, string path, byte[] body, params string[] expected)
    {
        var got = await PostAsync(client, path, body);
        if (!expected.Contains(got))
            throw new InvalidOperationException($"expected X-Rewrite-Cache: {string.Join(" or ", expected)}, got '{got}'");
    }

    static double P(List<double> sorted, double pct) =>
        sorted[Math.Clamp((int)Math.Ceiling(pct / 100 * sorted.Count) - 1, 0, sorted.Count - 1)];

    static string Load() => File.ReadAllText("/proc/loadavg").Split(' ')[0];
}
