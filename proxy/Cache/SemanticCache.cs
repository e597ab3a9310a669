using System.Diagnostics;
using Microsoft.Extensions.Logging;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;
using RewriteProxy.Telemetry;

namespace RewriteProxy.Cache;

/// <summary>How a lookup ended.</summary>
public enum LookupKind { HitExact, HitSemantic, Miss }

/// <summary>A lookup's result: the entry served on a hit, and the question vector (when one was computed) for the miss path.</summary>
public sealed record LookupResult(LookupKind Kind, StoredEntry? Entry, double? Similarity, float[]? QuestionVector);

/// <summary>The cache side failed; the caller fails open. <see cref="Reason"/> is a metric label: store | index | embedder.</summary>
public sealed class CacheFailure(string reason, string message, Exception? inner = null) : Exception(message, inner)
{
    public string Reason { get; } = reason;
}

/// <summary>
/// Exact lookup (normalised text, no embedding), then semantic lookup (nearest questions of the scope in the vector
/// index, each checked by the anchor guard), over the store. Keeps the index in step with the store.
/// </summary>
public sealed class SemanticCache
{
    /// <summary>Semantic candidates checked per lookup: when the nearest one is refused (say, another year), the next may agree.</summary>
    public const int Candidates = 4;

    readonly IRewriteStore _store;
    readonly VectorIndex _index;
    readonly IEmbedder _embedder;
    readonly AnchorGuard _guard;
    readonly HitDecision _decision;
    readonly StoreOptions _options;
    readonly ILogger _log;

    public SemanticCache(IRewriteStore store, VectorIndex index, IEmbedder embedder, AnchorGuard guard, StoreOptions options, ILogger log)
    {
        _store = store;
        _index = index;
        _embedder = embedder;
        _guard = guard;
        _decision = new HitDecision(guard);
        _options = options;
        _log = log;
        _store.Removed += ids =>
        {
            foreach (var id in ids) _index.Remove(id);
        };
        _store.Reset += _index.Clear;
    }

    public IEmbedder Embedder => _embedder;
    public IRewriteStore Store => _store;
    public AnchorGuard Guard => _guard;

    /// <summary>Opens the store (migrations included); throws <see cref="StoreException"/> when it cannot.</summary>
    public void Start() => _store.Open();

    /// <summary>
    /// Rebuilds the vector index from the store, off the request path: a million entries take minutes to index
    /// (DEVELOPERS.md). Meanwhile exact lookups work as usual and semantic lookups see what is loaded so far, so
    /// a call that would have been a semantic hit is a miss until then. Logs how long it took.
    /// </summary>
    public Task LoadIndexAsync() => Task.Run(() =>
    {
        var watch = Stopwatch.StartNew();
        try
        {
            var rows = _store.ReadVectors(_embedder.ModelId);
            var loaded = 0;
            _index.Load(Count(rows, () => loaded++));
            IndexReady = true;
            _log.LogInformation("cache: index rebuilt with {Count} vectors of model {ModelId} in {Ms} ms", loaded, _embedder.ModelId,
                watch.ElapsedMilliseconds);
        }
        catch (Exception e) when (e is StoreException or InvalidOperationException or OutOfMemoryException)
        {
            _log.LogError("cache: the index could not be rebuilt ({Reason}); semantic lookups see only new entries", e.Message);
        }
    });

    /// <summary>True once the start-up rebuild of the index has finished.</summary>
    public volatile bool IndexReady;

    static IEnumerable<(string, long, float[])> Count(IEnumerable<IndexRow> rows, Action each)
    {
        foreach (var r in rows)
        {
            each();
            yield return (r.ScopeKey, r.Id, r.Vector);
        }
    }

    DateTimeOffset MinCreated => DateTimeOffset.UtcNow - _options.Ttl;

    /// <summary>Exact, then semantic.</summary>
    /// <exception cref="CacheFailure">the store, the index or the embedder failed.</exception>
    public LookupResult Lookup(LaneOptions lane, string scopeKey, string question, string normalized, string partition)
    {
        StoredEntry? exact;
        try
        {
            exact = _store.FindExact(scopeKey, normalized, MinCreated);
        }
        catch (StoreException e)
        {
            throw new CacheFailure("store", e.Message, e);
        }
        if (exact is not null) return new LookupResult(LookupKind.HitExact, exact, null, null);

        var vector = Embed(question);
        IReadOnlyList<(long Id, float Similarity)> near;
        try
        {
            near = _index.Search(scopeKey, vector, Candidates, (float)lane.HitSimilarity);
        }
        catch (Exception e) when (e is not OutOfMemoryException)
        {
            throw new CacheFailure("index", e.Message, e);
        }
        if (near.Count == 0) return new LookupResult(LookupKind.Miss, null, null, vector);

        var asked = _decision.Read(question);
        foreach (var (id, similarity) in near)
        {
            StoredEntry? entry;
            try
            {
                entry = _store.Get(id, MinCreated);
            }
            catch (StoreException e)
            {
                throw new CacheFailure("store", e.Message, e);
            }
            if (entry is null) continue;
            var verdict = _decision.Decide(asked, _decision.Read(entry.Question), similarity);
            if (verdict.Agree) return new LookupResult(LookupKind.HitSemantic, entry, similarity, vector);

            ProxyMetrics.GuardRejections.WithLabels(lane.Name, verdict.Reason!).Inc();
            _store.Count(lane.Name, Tally.Refused(verdict.Reason!));
            _store.AppendEvent(new EventRow(DateTimeOffset.UtcNow, lane.Name, partition, "guard", question, entry.Question, similarity,
                "refused", verdict.Reason));
        }
        return new LookupResult(LookupKind.Miss, null, null, vector);
    }

    /// <summary>Embeds texts in one batch, timing the model run.</summary>
    /// <exception cref="CacheFailure">the embedder failed.</exception>
    public float[][] Embed(IReadOnlyList<string> texts)
    {
        try
        {
            return _embedder.Embed(texts);
        }
        catch (Exception e) when (e is not OutOfMemoryException)
        {
            throw new CacheFailure("embedder", e.Message, e);
        }
    }

    public float[] Embed(string text) => Embed([text])[0];

    /// <summary>Stores an accepted rewrite and indexes it once committed.</summary>
    /// <exception cref="CacheFailure">the store failed.</exception>
    public async Task<long> AddAsync(NewEntry entry, CancellationToken cancel)
    {
        long id;
        try
        {
            id = await _store.AddAsync(entry, cancel);
        }
        catch (StoreException e)
        {
            throw new CacheFailure("store", e.Message, e);
        }
        if (entry.Vector is not null && entry.ModelId == _embedder.ModelId)
        {
            // A replaced entry keeps its id: drop the old vector first.
            _index.Remove(id);
            _index.Add(entry.ScopeKey, id, entry.Vector);
        }
        return id;
    }
}
