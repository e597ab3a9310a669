using Microsoft.Extensions.Logging.Abstractions;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// The cache facade the lane flow talks to, over a real SQLite store and vector index, with an embedder whose vectors
/// the test chooses: exact and semantic hits, anchor-guard refusals counted and logged, and each part's failure
/// surfacing as a <see cref="CacheFailure"/> with its reason.
/// </summary>
public sealed class SemanticCacheTests : IAsyncLifetime
{
    const string Lane = "cacheunit";
    const int Width = 4;

    readonly string _path = TestProxy.NewStorePath();
    readonly TableEmbedder _embedder = new(Width);
    IRewriteStore _store = null!;
    SemanticCache _cache = null!;

    public async Task InitializeAsync()
    {
        _store = StoreFactory.Create(new StoreOptions { Path = _path }, new EventsOptions(), NullLoggerFactory.Instance);
        _cache = new SemanticCache(_store, new VectorIndex(Width), new HotEntries(), _embedder, new AnchorGuard(), new LaneTally(_store),
            new StoreOptions { Path = _path });
        await _store.OpenAsync(StoreAccess.ReadWrite, CancellationToken.None);
    }

    public async Task DisposeAsync()
    {
        await _store.DisposeAsync();
        Directory.Delete(Path.GetDirectoryName(_path)!, recursive: true);
    }

    static CacheKey Key(string question, string scope = "scope-a") =>
        new(Lane, scope, "partition-a", question, QuestionText.Normalize(question));

    static AcceptedRewrite Rewrite(string content) => new(content, new EntryScores(0.3, 1, [0.3]), "model-x", 20, 30);

    async Task StoreAsync(string question, params float[] vector)
    {
        _embedder.Set(question, vector);
        await _cache.StoreAsync(Key(question), _embedder.Embed(question), Rewrite("Draft for: " + question), CancellationToken.None);
    }

    [Fact]
    public async Task A_stored_rewrite_is_an_exact_hit_and_a_near_question_a_semantic_hit()
    {
        await StoreAsync("Where is the pool?", 1, 0, 0, 0);
        _embedder.Set("Where can I find the pool?", 0.95f, 0.31f, 0, 0);

        var exact = await _cache.LookupAsync(Key("where is the pool"), 0.85, CancellationToken.None);
        var semantic = await _cache.LookupAsync(Key("Where can I find the pool?"), 0.85, CancellationToken.None);
        var otherScope = await _cache.LookupAsync(Key("Where can I find the pool?", scope: "scope-b"), 0.85, CancellationToken.None);

        Assert.Equal(LookupKind.HitExact, exact.Kind);
        Assert.Equal("Draft for: Where is the pool?", exact.Entry!.Content);
        Assert.Equal(new EntryScores(0.3, 1, [0.3]).Drifts, exact.Entry.Scores.Drifts);
        Assert.Equal(LookupKind.HitSemantic, semantic.Kind);
        Assert.InRange(semantic.Similarity!.Value, 0.94, 0.96);
        Assert.Equal(LookupKind.Miss, otherScope.Kind);
        Assert.NotNull(otherScope.QuestionVector);
    }

    [Fact]
    public async Task A_candidate_the_anchor_guard_refuses_is_a_miss_counted_and_logged()
    {
        var since = DateTimeOffset.UtcNow.AddSeconds(-1);
        await StoreAsync("What were the pool's opening hours in 2022?", 0, 1, 0, 0);
        _embedder.Set("What were the pool's opening hours in 2023?", 0, 1, 0, 0);

        var found = await _cache.LookupAsync(Key("What were the pool's opening hours in 2023?"), 0.85, CancellationToken.None);
        await _store.FlushAsync(CancellationToken.None);

        Assert.Equal(LookupKind.Miss, found.Kind);
        var stats = Assert.Single((await _store.StatsAsync(CancellationToken.None)).Lanes, l => l.Lane == Lane);
        Assert.Equal(1, stats.RefusalsByReason[LabelValue.Of(AnchorReason.Number)]);
        var logged = Assert.Single(await _store.EventsAsync(Lane, since, CancellationToken.None).ToListAsync(), e => e.Kind == "guard");
        Assert.Equal(("refused", "number"), (logged.Verdict, logged.Reason));
    }

    [Fact]
    public async Task An_embedder_failure_is_a_cache_failure_of_the_embedder()
    {
        _embedder.Failing = true;

        var failure = await Assert.ThrowsAsync<CacheFailure>(async () => await _cache.LookupAsync(Key("Where is the pool?"), 0.85, CancellationToken.None));
        Assert.Equal(FailOpenReason.Embedder, failure.Reason);
        Assert.Equal(FailOpenReason.Embedder, Assert.Throws<CacheFailure>(() => _cache.Embed(["a draft"])).Reason);
    }

    [Fact]
    public async Task A_store_that_is_gone_is_a_cache_failure_of_the_store()
    {
        File.Delete(_path);

        Assert.Equal(FailOpenReason.Store,
            (await Assert.ThrowsAsync<CacheFailure>(async () => await _cache.LookupAsync(Key("Where is the pool?"), 0.85, CancellationToken.None))).Reason);
    }

    [Fact]
    public async Task A_vector_the_index_cannot_take_is_a_cache_failure_of_the_index_not_an_exception()
    {
        var failure = await Assert.ThrowsAsync<CacheFailure>(() =>
            _cache.StoreAsync(Key("Where is the pool?"), [1, 0, 0], Rewrite("draft"), CancellationToken.None));

        Assert.Equal(FailOpenReason.Index, failure.Reason);
    }

    [Fact]
    public void The_index_must_be_as_wide_as_the_embedders_vectors()
    {
        Assert.Throws<ArgumentException>(() => new SemanticCache(_store, new VectorIndex(Width + 1), new HotEntries(), _embedder, new AnchorGuard(),
            new LaneTally(_store), new StoreOptions { Path = _path }));
    }

    /// <summary>Vectors chosen by the test, L2-normalised; unknown texts get a vector of their own from their hash.</summary>
    sealed class TableEmbedder(int width) : IEmbedder
    {
        readonly Dictionary<string, float[]> _vectors = new(StringComparer.Ordinal);

        public bool Failing { get; set; }

        public string ModelId => "table";

        public int Dimension => width;

        public void Set(string text, params float[] vector) => _vectors[text] = Normalised(vector);

        public float[] Embed(string text) => Embed([text])[0];

        public float[][] Embed(IReadOnlyList<string> texts)
        {
            if (Failing) throw new InvalidOperationException("the model failed");
            return [.. texts.Select(t => _vectors.TryGetValue(t, out var v) ? v : Normalised(OfHash(t)))];
        }

        float[] OfHash(string text)
        {
            var random = new Random(StringComparer.Ordinal.GetHashCode(text));
            return [.. Enumerable.Range(0, width).Select(_ => (float)random.NextDouble() + 0.01f)];
        }

        static float[] Normalised(float[] v)
        {
            var norm = MathF.Sqrt(v.Sum(x => x * x));
            return [.. v.Select(x => x / norm)];
        }
    }
}
