using System.Net.Http.Headers;
using System.Text;
using System.Text.Json.Nodes;
using BenchmarkDotNet.Attributes;
using BenchmarkDotNet.Columns;
using BenchmarkDotNet.Configs;
using BenchmarkDotNet.Engines;
using BenchmarkDotNet.Jobs;
using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.Configuration;
using Microsoft.ML.OnnxRuntime;
using Perfolizer.Mathematics.OutlierDetection;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;

namespace RewriteProxy.Benchmarks.Hits;

/// <summary>
/// Latency of a lane hit through the proxy on loopback, as a client sees it (HttpClient, one kept-alive connection),
/// against the floor of a semantic hit: one bare <see cref="InferenceSession.Run(RunOptions, IReadOnlyCollection{string}, IReadOnlyCollection{OrtValue}, IReadOnlyCollection{string})"/>
/// on the paraphrase's word pieces, prepared once (with every core, as EmbedBenchmarks does, and with the proxy's own
/// session shape). Targets: exact hit p50 ≤ 1 ms; semantic hit p50 ≤ 1.5 × the bare run.
/// </summary>
[Config(typeof(HitConfig))]
public class HitBenchmarks
{
    /// <summary>
    /// One call per iteration and no outliers dropped, so the percentile columns are per-call percentiles (the p99 of
    /// iteration means would hide exactly the slow calls p99 is for). 2 000 calls per case.
    /// </summary>
    sealed class HitConfig : ManualConfig
    {
        public HitConfig()
        {
            AddJob(Job.Default
                .WithStrategy(RunStrategy.Throughput)
                .WithLaunchCount(1)
                .WithWarmupCount(Calls / 10)
                .WithIterationCount(Calls)
                .WithInvocationCount(1)
                .WithUnrollFactor(1)
                .WithOutlierMode(OutlierMode.DontRemove));
            AddColumn(StatisticColumn.P50, StatisticColumn.P95, new P99Column());
        }
    }

    const int Calls = 2000;

    // Invented scenario: a fictional city's bike-share handbook.
    const string Question = "How long can I keep a shared bike before the overtime fee starts?";
    const string Paraphrase = "How long may I keep a shared bike before the overtime fee begins?";
    const string Draft = "Riverton bike-share rides are free for the first thirty minutes on an annual plan. After that an " +
        "overtime fee starts and is charged for every further fifteen minutes you keep the bike, until it is docked again.";

    FixedUpstream _upstream = null!;
    WebApplication _proxy = null!;
    HttpClient _client = null!;
    string _storeFolder = null!;
    byte[] _questionBody = null!, _paraphraseBody = null!;
    int _upstreamCallsAfterSeed;

    InferenceSession _session = null!, _proxySizedSession = null!;
    readonly RunOptions _runOptions = new();
    string[] _inputNames = null!;
    readonly string[] _outputNames = ["last_hidden_state"];
    OrtValue[] _paraphraseInput = null!;

    [GlobalSetup]
    public void Setup() => SetupAsync().GetAwaiter().GetResult();

    async Task SetupAsync()
    {
        _upstream = await FixedUpstream.StartAsync(Draft);
        _storeFolder = Path.Combine(Path.GetTempPath(), "rewriteproxy-bench", Guid.NewGuid().ToString("N"));
        var configuration = new ConfigurationBuilder().AddInMemoryCollection(new Dictionary<string, string?>
        {
            ["Upstream:BaseUrl"] = _upstream.BaseUrl.ToString(),
            ["Store:Path"] = Path.Combine(_storeFolder, "cache.db"),
            ["Lanes:draft:Kind"] = "draft",
            // As config/rewriteproxy.json ships it.
            ["Lanes:draft:HitSimilarity"] = "0.85",
            // 0: every semantic hit runs the model, as a paraphrase never seen before does; otherwise from the second
            // call on the paraphrase's vector would come from memory and this would time a lookup, not a hit.
            ["Embedding:CacheSize"] = "0",
            // The per-request log line is measured in scripts/bench.sh (A/B); here it would flood the benchmark's console.
            ["Logging:LogLevel:Default"] = "Warning",
        }).Build();
        var (options, errors) = OptionsReader.Read(configuration);
        if (options is null) throw new InvalidOperationException(string.Join("\n", errors));
        _proxy = ProxyApp.Build(options, configuration, "http://127.0.0.1:0");
        await _proxy.StartAsync();
        _client = new HttpClient { BaseAddress = ProxyApp.BoundAddress(_proxy) };

        _questionBody = Body(Question);
        _paraphraseBody = Body(Paraphrase);
        await ExpectAsync(_questionBody, "miss");
        await ExpectAsync(_questionBody, "hit-exact");
        await ExpectAsync(_paraphraseBody, "hit-semantic");
        _upstreamCallsAfterSeed = _upstream.Calls;

        EmbeddingModelSource source = EmbeddingModelSource.Packaged();
        // The same session settings as the proxy's embedder with Embedding:Threads = 0 (every core); see EmbedBenchmarks.
        _session = new InferenceSession(source.Model, new Microsoft.ML.OnnxRuntime.SessionOptions
        {
            GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            IntraOpNumThreads = Environment.ProcessorCount,
            InterOpNumThreads = 1,
        });
        // The proxy's embedder splits the cores over OnnxEmbedder.DefaultSessions sessions (now one session with every
        // core) and its threads do not spin (OnnxEmbedder.SetThreadWaiting): the floor with the same session settings.
        var proxySized = new Microsoft.ML.OnnxRuntime.SessionOptions
        {
            GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            IntraOpNumThreads = Math.Max(1, Environment.ProcessorCount / Math.Min(OnnxEmbedder.DefaultSessions, Environment.ProcessorCount)),
            InterOpNumThreads = 1,
        };
        OnnxEmbedder.SetThreadWaiting(proxySized);
        _proxySizedSession = new InferenceSession(source.Model, proxySized);
        _inputNames = _session.InputMetadata.Keys.ToArray();
        var encoder = WordPieceEncoder.Load(new MemoryStream(source.Vocabulary), "vocab.txt", options.Embedding.MaxTokens);
        _paraphraseInput = Prepare(encoder.Encode(Paraphrase)!);
    }

    static byte[] Body(string question) => Encoding.UTF8.GetBytes(new JsonObject
    {
        ["model"] = "bench-model",
        ["temperature"] = 0,
        ["messages"] = new JsonArray(
            new JsonObject { ["role"] = "system", ["content"] = "Write a short passage that answers the question." },
            new JsonObject { ["role"] = "user", ["content"] = question }),
    }.ToJsonString());

    async Task<string> PostAsync(byte[] body)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, "/lane/draft/v1/chat/completions")
        {
            Content = new ByteArrayContent(body) { Headers = { ContentType = new MediaTypeHeaderValue("application/json") } },
        };
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", "sk-bench-tenant");
        using var response = await _client.SendAsync(request);
        await response.Content.ReadAsByteArrayAsync();
        if (!response.IsSuccessStatusCode) throw new InvalidOperationException($"lane call answered {(int)response.StatusCode}");
        return response.Headers.TryGetValues("X-Rewrite-Cache", out var values) ? values.First() : "";
    }

    async Task ExpectAsync(byte[] body, string expected)
    {
        var got = await PostAsync(body);
        if (got != expected) throw new InvalidOperationException($"expected X-Rewrite-Cache: {expected}, got '{got}'");
    }

    OrtValue[] Prepare(IReadOnlyList<int> pieces)
    {
        var ids = pieces.Select(p => (long)p).ToArray();
        long[] shape = [1, ids.Length];
        return _inputNames.Select(name => name switch
        {
            "input_ids" => OrtValue.CreateTensorValueFromMemory(ids, shape),
            "attention_mask" => OrtValue.CreateTensorValueFromMemory(Enumerable.Repeat(1L, ids.Length).ToArray(), shape),
            _ => OrtValue.CreateTensorValueFromMemory(new long[ids.Length], shape),
        }).ToArray();
    }

    [Benchmark(Baseline = true)]
    public float Bare_model_run()
    {
        using var outputs = _session.Run(_runOptions, _inputNames, _paraphraseInput, _outputNames);
        return outputs[0].GetTensorDataAsSpan<float>()[0];
    }

    [Benchmark]
    public float Bare_model_run_proxy_sized_session()
    {
        using var outputs = _proxySizedSession.Run(_runOptions, _inputNames, _paraphraseInput, _outputNames);
        return outputs[0].GetTensorDataAsSpan<float>()[0];
    }

    [Benchmark]
    public string Semantic_hit() => PostAsync(_paraphraseBody).GetAwaiter().GetResult();

    [Benchmark]
    public string Exact_hit() => PostAsync(_questionBody).GetAwaiter().GetResult();

    /// <summary>The floor of any call through the proxy on this machine: one GET round trip that does no work.</summary>
    [Benchmark]
    public int Health_check_round_trip() => HealthAsync().GetAwaiter().GetResult();

    async Task<int> HealthAsync()
    {
        using var response = await _client.GetAsync("/healthz");
        return (await response.Content.ReadAsByteArrayAsync()).Length;
    }

    [GlobalCleanup]
    public void Cleanup()
    {
        // A hit that went upstream would have timed the upstream, not the cache.
        var extra = _upstream.Calls - _upstreamCallsAfterSeed;
        _client.Dispose();
        _proxy.StopAsync().GetAwaiter().GetResult();
        _proxy.DisposeAsync().AsTask().GetAwaiter().GetResult();
        _upstream.DisposeAsync().AsTask().GetAwaiter().GetResult();
        _session.Dispose();
        _proxySizedSession.Dispose();
        foreach (var value in _paraphraseInput) value.Dispose();
        _runOptions.Dispose();
        try { Directory.Delete(_storeFolder, recursive: true); } catch (IOException) { }
        if (extra != 0) throw new InvalidOperationException($"{extra} hit(s) reached the upstream");
    }
}
