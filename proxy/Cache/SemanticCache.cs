using System.Diagnostics;
using Microsoft.Extensions.Logging;
using RewriteProxy.Embedding;
using RewriteProxy.Telemetry;

namespace RewriteProxy.Cache;

/// <summary>
/// Exact lookup (normalised text, no embedding), then semantic lookup (nearest questions of the scope in the vector
/// index, each checked by the anchor guard), over the store. Keeps the index in step with the store.
/// </summary>
public sealed class SemanticCache : IRewriteCache
{
    /// <summary>Semantic candidates checked per lookup: when the nearest one is refused (say, another year), the next may agree.</summary>
    public const int Candidates = 4;

    readonly IRewriteStore _store;
    readonly VectorIndex _index;
    readonly IEmbedder _embedder;
    readonly AnchorGuard _guard;
    readonly HitDecision _decision;
    readonly LaneTally _tally;
    readonly StoreOptions _options;
    readonly ILogger _log;

    public SemanticCache(IRewriteStore store, VectorIndex index, IEmbedder embedder, AnchorGuard guard, LaneTally tally, StoreOptions options,
        ILogger log)
    {
        if (index.Dimensions != embedder.Dimension)
            throw new ArgumentException($"The index holds vectors of {index.Dimensions} dimensions, the embedder makes {embedder.Dimension}.", nameof(index));
        _store = store;
        _index = index;
        _embedder = embedder;
        _guard = guard;
        _decision = new HitDecision(guard);
        _tally = tally;
        _options = options;
        _log = log;
        _store.Removed += ids =>
        {
            foreach (var id in ids) _index.Remove(id);
        };
        _store.Reset += _index.Clear;
    }

    /// <summary>Opens the store (migrations included); throws <see cref="StoreException"/> when it cannot.</summary>
    public void Start() => _store.Open();

    /// <summary>
    /// Rebuilds the vector index from the store, off the request path: a million entries take minutes to index
    /// (docs/measurements/index.md). Meanwhile exact lookups work as usual and semantic lookups see what is loaded so far, so
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

    public LookupResult LookupExact(CacheKey key)
    {
        try
        {
            return _store.FindExact(key.ScopeKey, key.Normalized, MinCreated) is { } exact
                ? new LookupResult(LookupKind.HitExact, exact, null, null)
                : new LookupResult(LookupKind.Miss, null, null, null);
        }
        catch (StoreException e)
        {
            throw new CacheFailure(FailOpenReason.Store, e.Message, e);
        }
    }

    public LookupResult Lookup(CacheKey key, double minSimilarity)
    {
        StoredEntry? exact;
        try
        {
            exact = _store.FindExact(key.ScopeKey, key.Normalized, MinCreated);
        }
        catch (StoreException e)
        {
            throw new CacheFailure(FailOpenReason.Store, e.Message, e);
        }
        if (exact is not null) return new LookupResult(LookupKind.HitExact, exact, null, null);

        var vector = Embed([key.Question])[0];
        IReadOnlyList<(long Id, float Similarity)> near;
        try
        {
            near = _index.Search(key.ScopeKey, vector, Candidates, (float)minSimilarity);
        }
        catch (Exception e) when (e is not OutOfMemoryException)
        {
            throw new CacheFailure(FailOpenReason.Index, e.Message, e);
        }
        if (near.Count == 0) return new LookupResult(LookupKind.Miss, null, null, vector);

        var asked = _decision.Read(key.Question);
        foreach (var (id, similarity) in near)
        {
            StoredEntry? entry;
            try
            {
                entry = _store.Get(id, MinCreated);
            }
            catch (StoreException e)
            {
                throw new CacheFailure(FailOpenReason.Store, e.Message, e);
            }
            if (entry is null) continue;
            var verdict = _decision.Decide(asked, _decision.Read(entry.Question), similarity);
            if (verdict.Agree) return new LookupResult(LookupKind.HitSemantic, entry, similarity, vector);

            var reason = verdict.Reason!.Value;
            _tally.Refused(key.Lane, reason);
            _store.AppendEvent(new EventRow(DateTimeOffset.UtcNow, key.Lane, key.PartitionHash, "guard", key.Question, entry.Question,
                similarity, "refused", LabelValue.Of(reason)));
        }
        return new LookupResult(LookupKind.Miss, null, null, vector);
    }

    public float[][] Embed(IReadOnlyList<string> texts)
    {
        try
        {
            return _embedder.Embed(texts);
        }
        catch (Exception e) when (e is not OutOfMemoryException)
        {
            throw new CacheFailure(FailOpenReason.Embedder, e.Message, e);
        }
    }

    public async Task StoreAsync(CacheKey key, float[]? questionVector, AcceptedRewrite rewrite, CancellationToken cancel)
    {
        // The vector came from this cache's embedder (Embed or Lookup), so the entry carries that model's id.
        var entry = new NewEntry(key.ScopeKey, key.PartitionHash, key.Lane, key.Question, key.Normalized, questionVector,
            questionVector is null ? null : _embedder.ModelId,
            rewrite.Content, rewrite.Scores, rewrite.ResponseModel, rewrite.PromptTokens, rewrite.CompletionTokens, DateTimeOffset.UtcNow);
        long id;
        try
        {
            id = await _store.AddAsync(entry, cancel);
        }
        catch (StoreException e)
        {
            throw new CacheFailure(FailOpenReason.Store, e.Message, e);
        }
        // Without a vector (an unlocated call's entry) the entry is found only exactly, never by the index.
        if (questionVector is null) return;
        try
        {
            // A replaced entry keeps its id: drop the old vector first.
            _index.Remove(id);
            _index.Add(key.ScopeKey, id, questionVector);
        }
        catch (Exception e) when (e is not OutOfMemoryException)
        {
            throw new CacheFailure(FailOpenReason.Index, e.Message, e);
        }
    }

    public void RecordHit(StoredEntry entry) => _store.RecordHit(entry.Id, DateTimeOffset.UtcNow);

    public void AppendEvent(EventRow row) => _store.AppendEvent(row);
}
