using RewriteProxy.Store;

namespace RewriteProxy.Cache;

/// <summary>Which question a lookup or a store is for: the lane, where an entry may be shared (scope, partition), and the question as asked and normalised.</summary>
public sealed record CacheKey(string Lane, string ScopeKey, string PartitionHash, string Question, string Normalized);

/// <summary>What the drift guard accepted on a miss, to be stored as an entry.</summary>
public sealed record AcceptedRewrite(string Content, EntryScores Scores, string? ResponseModel, int PromptTokens, int CompletionTokens);

/// <summary>How a lookup ended.</summary>
public enum LookupKind { HitExact, HitSemantic, Miss }

/// <summary>A lookup's result: the entry served on a hit, and the question vector (when one was computed) for the miss path.</summary>
public sealed record LookupResult(LookupKind Kind, StoredEntry? Entry, double? Similarity, float[]? QuestionVector);

/// <summary>
/// Everything the lane flow asks of the cache side: look a question up, embed texts for the drift guard, store an
/// accepted rewrite, count a hit, log a judged rewrite. The store, the vector index, the embedder and the anchor guard
/// stay behind it. A method that fails throws <see cref="CacheFailure"/>, and the caller answers as if there were no
/// cache; <see cref="RecordHit"/> and <see cref="AppendEvent"/> are queued and never throw.
/// </summary>
public interface IRewriteCache
{
    /// <summary>Exact lookup on the normalised question, then semantic lookup (similarity ≥ <paramref name="minSimilarity"/>, anchors agreeing).</summary>
    /// <exception cref="CacheFailure">the store, the index or the embedder failed.</exception>
    ValueTask<LookupResult> LookupAsync(CacheKey key, double minSimilarity, CancellationToken cancel);

    /// <summary>Exact lookup only (no embedding): for a call whose question is not located with confidence.</summary>
    /// <exception cref="CacheFailure">the store failed.</exception>
    ValueTask<LookupResult> LookupExactAsync(CacheKey key, CancellationToken cancel);

    /// <summary>L2-normalised vectors of <paramref name="texts"/>, in one model run.</summary>
    /// <exception cref="CacheFailure">the embedder failed.</exception>
    float[][] Embed(IReadOnlyList<string> texts);

    /// <summary>
    /// Stores an accepted rewrite under its question's vector; completes once committed and indexed. Without a vector the
    /// entry is reached only by an exact lookup (an unlocated call's whole message).
    /// </summary>
    /// <exception cref="CacheFailure">the store or the index failed.</exception>
    Task StoreAsync(CacheKey key, float[]? questionVector, AcceptedRewrite rewrite, CancellationToken cancel);

    /// <summary>
    /// Claims the miss of <paramref name="key"/> for this process, for at most <paramref name="hold"/>: false when another
    /// process sharing the store holds it (then <see cref="AwaitClaimAsync"/>). Always true on a store of one process.
    /// </summary>
    /// <exception cref="CacheFailure">the store failed.</exception>
    Task<bool> ClaimMissAsync(CacheKey key, TimeSpan hold, CancellationToken cancel);

    /// <summary>Lets go of this process's claim, entry stored or not. Never throws.</summary>
    Task ReleaseMissAsync(CacheKey key);

    /// <summary>Waits at most <paramref name="wait"/> for the entry of another process's claim on <paramref name="key"/>.</summary>
    /// <exception cref="CacheFailure">the store failed.</exception>
    Task<ClaimWait> AwaitClaimAsync(CacheKey key, TimeSpan wait, CancellationToken cancel);

    /// <summary>Counts a served hit on its entry (least recently hit entries are evicted first).</summary>
    void RecordHit(StoredEntry entry);

    /// <summary>Appends a judged rewrite or a guard refusal to the event log.</summary>
    void AppendEvent(EventRow row);
}
