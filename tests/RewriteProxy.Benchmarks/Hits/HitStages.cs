using System.Diagnostics;
using System.Net.Http.Headers;
using System.Text;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.Configuration;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;
using RewriteProxy.Lanes;
using RewriteProxy.Store;
using RewriteProxy.Wire;

namespace RewriteProxy.Benchmarks.Hits;

/// <summary>
/// Where a lane hit's time goes, stage by stage, calling the same code the lane flow calls, in-process:
/// <code>dotnet RewriteProxy.Benchmarks.dll hit-stages [--calls 500]</code>
/// The proxy (ProxyApp.Build, CacheSize 0, log at Warning) is seeded over HTTP with one entry; then each stage runs
/// alone `calls` times and its p50 is printed, followed by the whole lookup and a whole call over HTTP. Read-only: it
/// measures the hit path of proxy/Cache and proxy/Lanes for whoever changes them, and changes nothing there.
/// </summary>
public static class HitStages
{
    const string Question = "How long can I keep a shared bike before the overtime fee starts?";
    const string Paraphrase = "How long may I keep a shared bike before the overtime fee begins?";
    const string Draft = "Riverton bike-share rides are free for the first thirty minutes on an annual plan. After that an " +
        "overtime fee starts and is charged for every further fifteen minutes you keep the bike, until it is docked again.";

    public static async Task<int> RunAsync(string[] args)
    {
        int calls = args.Length > 1 && args[0] == "--calls" ? int.Parse(args[1]) : 500;
        await using var upstream = await FixedUpstream.StartAsync(Draft);
        var folder = Path.Combine(Path.GetTempPath(), "rewriteproxy-bench", Guid.NewGuid().ToString("N"));
        var configuration = new ConfigurationBuilder().AddInMemoryCollection(new Dictionary<string, string?>
        {
            ["Upstream:BaseUrl"] = upstream.BaseUrl.ToString(),
            ["Store:Path"] = Path.Combine(folder, "cache.db"),
            ["Lanes:draft:Kind"] = "draft",
            ["Lanes:draft:HitSimilarity"] = "0.85",
            ["Embedding:CacheSize"] = "0",
            ["Logging:LogLevel:Default"] = "Warning",
        }).Build();
        var (options, errors) = OptionsReader.Read(configuration);
        if (options is null) throw new InvalidOperationException(string.Join("\n", errors));
        var proxy = ProxyApp.Build(options, configuration, "http://127.0.0.1:0");
        await proxy.StartAsync();
        try
        {
            using var client = new HttpClient { BaseAddress = ProxyApp.BoundAddress(proxy) };
            byte[] questionBody = Body(Question), paraphraseBody = Body(Paraphrase);
            if (await PostAsync(client, questionBody) != "miss" || await PostAsync(client, paraphraseBody) != "hit-semantic")
                throw new InvalidOperationException("seeding did not give miss then hit-semantic");
            await proxy.Services.GetRequiredService<IRewriteStore>().FlushAsync(CancellationToken.None);

            var cache = proxy.Services.GetRequiredService<SemanticCache>();
            var store = proxy.Services.GetRequiredService<IRewriteStore>();
            var index = proxy.Services.GetRequiredService<VectorIndex>();
            var guard = proxy.Services.GetRequiredService<AnchorGuard>();
            var embedder = proxy.Services.GetRequiredService<IEmbedder>();
            var lane = options.Lanes["draft"];
            var endpoint = LaneEndpoint.Match("/v1/chat/completions", Microsoft.AspNetCore.Http.QueryString.Empty)!;
            var credential = new Microsoft.AspNetCore.Http.HeaderDictionary { ["Authorization"] = "Bearer sk-bench-tenant" };
            var request = ChatCompletionsFormat.Instance.Read(paraphraseBody, null);
            var site = QuestionExtractor.Extract(request, lane).Site!;
            var partition = PartitionKey.Of(options.Partition, credential);
            var scope = ScopeKey.Compute(lane, endpoint, request, site, partition, "");
            var normalized = QuestionText.Normalize(site.Question);
            var questionNormalized = QuestionText.Normalize(Question);
            var minCreated = DateTimeOffset.UtcNow - options.Store.Ttl;
            var vector = embedder.Embed(Paraphrase);
            var near = index.Search(scope, vector, SemanticCache.Candidates, (float)lane.HitSimilarity);
            if (near.Count == 0) throw new InvalidOperationException("the index has no candidate for the paraphrase");
            long id = near[0].Id;
            var entry = (await store.GetAsync(id, minCreated, CancellationToken.None))!;
            var asked = guard.Extract(Paraphrase);
            var decision = new HitDecision(guard);
            // The same model with the proxy's session settings, run on pre-encoded input: the floor of "embed the question".
            var source = EmbeddingModelSource.Packaged();
            using var bare = HitLatency.Session(source, Environment.ProcessorCount, OnnxEmbedder.SetThreadWaiting);
            var encoder = WordPieceEncoder.Load(new MemoryStream(source.Vocabulary), "vocab.txt", 256);
            string[] inputNames = bare.InputMetadata.Keys.ToArray();
            var input = HitLatency.Prepare(inputNames, encoder.Encode(Paraphrase)!);
            using var runOptions = new Microsoft.ML.OnnxRuntime.RunOptions();
            var askedRead = decision.Read(Paraphrase);
            var entryRead = decision.Read(entry.Question);
            double similarity = near[0].Similarity;

            var stages = new (string Name, Func<object?> Run)[]
            {
                ("parse request (chat format)", () => ChatCompletionsFormat.Instance.Read(paraphraseBody, null)),
                ("question + scope key + normal form", () =>
                {
                    var r = ChatCompletionsFormat.Instance.Read(paraphraseBody, null);
                    var s = QuestionExtractor.Extract(r, lane).Site!;
                    return ScopeKey.Compute(lane, endpoint, r, s, PartitionKey.Of(options.Partition, credential), "") + QuestionText.Normalize(s.Question);
                }),
                ("store.FindExactAsync (no row: paraphrase)", () => store.FindExactAsync(scope, normalized, minCreated, CancellationToken.None).AsTask().GetAwaiter().GetResult()),
                ("store.FindExactAsync (row: question)", () => store.FindExactAsync(scope, questionNormalized, minCreated, CancellationToken.None).AsTask().GetAwaiter().GetResult()),
                ("embed the question (model run + tokens)", () => embedder.Embed(Paraphrase)),
                ("bare model run, proxy's session settings (pre-encoded)", () => { using var o = bare.Run(runOptions, inputNames, input, ["last_hidden_state"]); return null; }),
                ("word pieces of the question", () => encoder.Encode(Paraphrase)),
                ("index.Search (k = 4)", () => index.Search(scope, vector, SemanticCache.Candidates, (float)lane.HitSimilarity)),
                ("store.GetAsync (one candidate)", () => store.GetAsync(id, minCreated, CancellationToken.None).AsTask().GetAwaiter().GetResult()),
                ("guard.Extract (asked question)", () => guard.Extract(Paraphrase)),
                ("guard.Extract (candidate's question)", () => guard.Extract(entry.Question)),
                ("guard.Compare (extracted anchors)", () => guard.Compare(asked, guard.Extract(entry.Question))),
                ("decision.Read (asked question)", () => decision.Read(Paraphrase)),
                ("decision.Read (candidate's question)", () => decision.Read(entry.Question)),
                ("decision.Decide (both read)", () => decision.Decide(askedRead, entryRead, similarity)),
                ("cache.LookupAsync, exact hit (whole)", () => cache.LookupAsync(new CacheKey(lane.Name, scope, partition, Question, questionNormalized), lane.HitSimilarity, CancellationToken.None).AsTask().GetAwaiter().GetResult()),
                ("cache.LookupAsync, semantic hit (whole)", () => cache.LookupAsync(new CacheKey(lane.Name, scope, partition, Paraphrase, normalized), lane.HitSimilarity, CancellationToken.None).AsTask().GetAwaiter().GetResult()),
                ("HTTP exact hit (whole call)", () => PostAsync(client, questionBody).GetAwaiter().GetResult()),
                ("HTTP semantic hit (whole call)", () => PostAsync(client, paraphraseBody).GetAwaiter().GetResult()),
                ("HTTP GET /healthz (empty round trip)", () => client.GetStringAsync("/healthz").GetAwaiter().GetResult()),
            };
            Console.WriteLine($"hit stages: {calls} calls each after {calls / 5} unrecorded, the stages in turn call by call " +
                $"(a change of the machine's load falls on every stage alike); load {Load()}");
            foreach (var (_, run) in stages)
                for (int i = 0; i < calls / 5; i++) run();
            var times = stages.Select(_ => new double[calls]).ToArray();
            for (int i = 0; i < calls; i++)
            {
                for (int k = 0; k < stages.Length; k++)
                {
                    long t0 = Stopwatch.GetTimestamp();
                    stages[k].Run();
                    times[k][i] = Stopwatch.GetElapsedTime(t0).TotalMicroseconds;
                }
            }
            Console.WriteLine("| stage | p50 µs | p90 µs |");
            Console.WriteLine("| --- | ---: | ---: |");
            for (int k = 0; k < stages.Length; k++)
            {
                Array.Sort(times[k]);
                Console.WriteLine($"| {stages[k].Name} | {times[k][calls / 2]:0} | {times[k][calls * 9 / 10]:0} |");
            }
            Console.WriteLine($"load {Load()}");
            return 0;
        }
        finally
        {
            await proxy.StopAsync();
            await proxy.DisposeAsync();
            try { Directory.Delete(folder, recursive: true); } catch (IOException) { }
        }
    }

    static byte[] Body(string question) => Encoding.UTF8.GetBytes(new JsonObject
    {
        ["model"] = "bench-model",
        ["temperature"] = 0,
        ["messages"] = new JsonArray(
            new JsonObject { ["role"] = "system", ["content"] = "Write a short passage that answers the question." },
            new JsonObject { ["role"] = "user", ["content"] = question }),
    }.ToJsonString());

    static async Task<string> PostAsync(HttpClient client, byte[] body)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, "/lane/draft/v1/chat/completions")
        {
            Content = new ByteArrayContent(body) { Headers = { ContentType = new MediaTypeHeaderValue("application/json") } },
        };
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", "sk-bench-tenant");
        using var response = await client.SendAsync(request);
        await response.Content.ReadAsByteArrayAsync();
        return response.Headers.TryGetValues("X-Rewrite-Cache", out var values) ? values.First() : "";
    }

    static string Load() => File.ReadAllText("/proc/loadavg").Split(' ')[0];
}
