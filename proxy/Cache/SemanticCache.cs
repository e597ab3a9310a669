using System.Runtime.CompilerServices;
using RewriteProxy.Embedding;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;

namespace RewriteProxy.Cache;

/// <summary>
/// Exact lookup (normalised text, no embedding), then semantic lookup (nearest questions of the scope in the vector
/// index, each checked by the anchor guard), over the store. The <see cref="IndexFollower"/> keeps the index in step
/// with the store; this cache also indexes what it stores itself at once, so a repeat on this process hits immediately.
/// </summary>
public sealed class SemanticCache : IRewriteCache
{
    /// <summary>Semantic candidates checked per lookup: when the nearest one is refused (say, another year), the next may agree.</summary>
    public const int Candidates = 4;

    readonly IRewriteStore _store;
    readonly VectorIndex _index;
    readonly HotEntries _hot;
    readonly IEmbedder _embedder;
    readonly HitDecision _decision;
    readonly LaneTally _tally;
    readonly StoreOptions _options;
    readonly MissClaims _claims;
    // A stored question's reading (anchors, words, frames: ~60 µs), made once per entry object rather than on every
    // lookup that meets it; HotEntries keeps the recently served entry objects, and a reading goes with its entry.
    readonly ConditionalWeakTable<StoredEntry, HitQuestion> _readings = new();
    readonly ConditionalWeakTable<StoredEntry, HitQuestion>.CreateValueCallback _read;

    public SemanticCache(IRewriteStore store, VectorIndex index, HotEntries hot, IEmbedder embedder, AnchorGuard guard, LaneTally tally,
        StoreOptions options)
    {
        if (index.Dimensions != embedder.Dimension)
            throw new ArgumentException($"The index holds vectors of {index.Dimensions} dimensions, the embedder makes {embedder.Dimension}.", nameof(index));
        _store = store;
        _index = index;
        _hot = hot;
        _embedder = embedder;
        _decision = new HitDecision(guard);
        _read = entry => _decision.Read(entry.Question);
        _tally = tally;
        _options = options;
        _claims = new MissClaims(store, FindExactAsync);
    }

    DateTimeOffset MinCreated => DateTimeOffset.UtcNow - _options.Ttl;

    public async ValueTask<LookupResult> LookupExactAsync(CacheKey key, CancellationToken cancel) =>
        await FindExactAsync(key, cancel) is { } exact
            ? new LookupResult(LookupKind.HitExact, exact, null, null)
            : new LookupResult(LookupKind.Miss, null, null, null);

    async ValueTask<StoredEntry?> FindExactAsync(CacheKey key, CancellationToken cancel)
    {
        try
        {
            return await _store.FindExactAsync(key.ScopeKey, key.Normalized, MinCreated, cancel);
        }
        catch (StoreException e)
        {
            throw new CacheFailure(FailOpenReason.Store, e.Message, e);
        }
    }

    public async ValueTask<LookupResult> LookupAsync(CacheKey key, double minSimilarity, CancellationToken cancel)
    {
        if (await FindExactAsync(key, cancel) is { } exact) return new LookupResult(LookupKind.HitExact, exact, null, null);

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
            // The index searched this scope only; an entry of another scope under the id is one the index has not caught up on.
            if (await CandidateAsync(id, cancel) is not { } entry || entry.ScopeKey != key.ScopeKey) continue;
            var verdict = _decision.Decide(asked, _readings.GetValue(entry, _read), similarity);
            if (verdict.Agree) return new LookupResult(LookupKind.HitSemantic, entry, similarity, vector);

            var reason = verdict.Reason!.Value;
            _tally.Refused(key.Lane, reason);
            _store.AppendEvent(new EventRow(DateTimeOffset.UtcNow, key.Lane, key.PartitionHash, "guard", key.Question, entry.Question,
                similarity, "refused", LabelValue.Of(reason)));
        }
        return new LookupResult(LookupKind.Miss, null, null, vector);
    }

    /// <summary>A semantic candidate from the hot entries, else from the store (then kept hot).</summary>
    async ValueTask<StoredEntry?> CandidateAsync(long id, CancellationToken cancel)
    {
        var minCreated = MinCreated;
        if (_hot.TryGet(id, minCreated, out var hot)) return hot;
        var stamp = _hot.Stamp;
        StoredEntry? entry;
        try
        {
            entry = await _store.GetAsync(id, minCreated, cancel);
        }
        catch (StoreException e)
        {
            throw new CacheFailure(FailOpenReason.Store, e.Message, e);
        }
        if (entry is not null) _hot.Add(entry, stamp);
        return entry;
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
        // What the follower will apply too (idempotent); done here so that a repeat on this process hits at once.
        // A replaced entry keeps its id: its old content and vector go.
        _hot.Invalidate(id);
        try
        {
            // Without a vector (an unlocated call's entry) the entry is found only exactly, never by the index.
            if (questionVector is null) _index.Remove(id);
            else _index.Add(key.ScopeKey, id, questionVector);
        }
        catch (Exception e) when (e is not OutOfMemoryException)
        {
            throw new CacheFailure(FailOpenReason.Index, e.Message, e);
        }
    }

    public Task<bool> ClaimMissAsync(CacheKey key, TimeSpan hold, CancellationToken cancel) => _claims.ClaimAsync(key, hold, cancel);

    public Task ReleaseMissAsync(CacheKey key) => _claims.ReleaseAsync(key);

    public Task<ClaimWait> AwaitClaimAsync(CacheKey key, TimeSpan wait, CancellationToken cancel) => _claims.AwaitAsync(key, wait, cancel);

    public void RecordHit(StoredEntry entry) => _store.RecordHit(entry.Id, DateTimeOffset.UtcNow);

    public void AppendEvent(EventRow row) => _store.AppendEvent(row);
}
