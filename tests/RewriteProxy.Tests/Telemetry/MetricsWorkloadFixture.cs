using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Telemetry;

/// <summary>Counts model runs: each call reaching the ONNX embedder is one batched run, one rewriteproxy_embed_duration_seconds observation.</summary>
sealed class CountingEmbedder(IEmbedder inner) : IEmbedder
{
    int _runs;

    public int Runs => Volatile.Read(ref _runs);
    public string ModelId => inner.ModelId;
    public int Dimension => inner.Dimension;

    public float[] Embed(string text)
    {
        Interlocked.Increment(ref _runs);
        return inner.Embed(text);
    }

    public float[][] Embed(IReadOnlyList<string> texts)
    {
        Interlocked.Increment(ref _runs);
        return inner.Embed(texts);
    }
}

/// <summary>An embedder that always fails, so that every lookup past the exact one fails open with reason "embedder".</summary>
sealed class FailingEmbedder : IEmbedder
{
    public string ModelId => "failing-embedder";
    public int Dimension => 384;
    public float[] Embed(string text) => throw new InvalidOperationException("the embedding model is unavailable (test)");
    public float[][] Embed(IReadOnlyList<string> texts) => throw new InvalidOperationException("the embedding model is unavailable (test)");
}

/// <summary>
/// Runs <see cref="MetricsWorkload"/> once through a real proxy, plus lane calls through a second proxy whose embedder
/// fails (fail-open), and keeps the registry's text before and the proxy's /metrics scrape after.
/// </summary>
public sealed class MetricsWorkloadFixture : IAsyncLifetime
{
    public const string DraftLane = "mdraft";
    public const string SiblingsLane = "msiblings";
    public const string FailOpenLane = "mfailopen";

    /// <summary>Questions sent through the proxy whose embedder fails; each one fails open.</summary>
    public static readonly string[] FailOpenQuestions =
        ["Does the Marrow Island ferry sell hot drinks on board?", "Is there a left-luggage room at the Marrow Island quay?"];

    ScriptedUpstream _upstream = null!;
    OnnxEmbedder _onnx = null!;
    CountingEmbedder _model = null!;

    public WorkloadTally Tally { get; private set; } = null!;
    public RewriteProxyOptions Options { get; private set; } = null!;
    public int FailOpenCalls { get; private set; }
    public IReadOnlyList<string> FailOpenReplies { get; private set; } = [];

    /// <summary>Model runs of the workload's proxy, counted at the embedder.</summary>
    public int ModelRuns { get; private set; }

    /// <summary>The process-wide registry before the workload: baseline for the series that are not per lane.</summary>
    public MetricsExposition Before { get; private set; } = null!;

    /// <summary>GET /metrics of the workload's proxy after the workload.</summary>
    public MetricsExposition After { get; private set; } = null!;

    public async Task InitializeAsync()
    {
        _upstream = await ScriptedUpstream.StartAsync();
        // A model of its own, so that every run of it is this workload's; loaded (and its load probe run) before the baseline.
        _onnx = OnnxEmbedder.Load(new EmbeddingOptions());
        _model = new CountingEmbedder(_onnx);
        var embedder = CachingEmbedder.Over(_model, new EmbeddingOptions().CacheSize);
        _ = SharedEmbedder.Instance; // TestProxy registers it; load it now rather than inside the measured window

        Before = MetricsExposition.Parse(await RegistryTextAsync());
        var runsBefore = _model.Runs;

        await using (var failing = await TestProxy.StartAsync(_upstream.BaseUrl,
                         new Dictionary<string, string?> { [$"Lanes:{FailOpenLane}:Kind"] = "draft" },
                         services => services.AddSingleton<IEmbedder>(new FailingEmbedder())))
        {
            var replies = new List<string>();
            foreach (var question in FailOpenQuestions)
            {
                var reply = await failing.Client.PostLaneAsync(FailOpenLane, LaneCalls.Request(question, model: MetricsWorkload.Model),
                    MetricsWorkload.Credentials[0]);
                Assert.Equal(200, reply.Status);
                replies.Add(reply.Cache);
            }
            FailOpenReplies = replies;
            FailOpenCalls = replies.Count(r => r == "bypass");
        }

        var proxy = await TestProxy.StartAsync(_upstream.BaseUrl, MetricsWorkload.LaneSettings(DraftLane, SiblingsLane),
            services => services.AddSingleton(embedder));
        await using (proxy)
        {
            Options = proxy.Options;
            Tally = await MetricsWorkload.RunAsync(proxy, _upstream, embedder, DraftLane, SiblingsLane);
            ModelRuns = _model.Runs - runsBefore;
            After = MetricsExposition.Parse(await proxy.Client.GetStringAsync("/metrics"));
        }
    }

    static async Task<string> RegistryTextAsync()
    {
        using var buffer = new MemoryStream();
        await Prometheus.Metrics.DefaultRegistry.CollectAndExportAsTextAsync(buffer);
        return System.Text.Encoding.UTF8.GetString(buffer.ToArray());
    }

    /// <summary>How much a process-wide series moved during the workload.</summary>
    public double Delta(string name, params (string, string)[] labels) => After.Sum(name, labels) - Before.Sum(name, labels);

    public async Task DisposeAsync()
    {
        await _upstream.DisposeAsync();
        _onnx.Dispose();
    }
}
