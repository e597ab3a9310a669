namespace RewriteProxy.Cache;

/// <summary>
/// Where entries and events live. SQLite is the embedded default; a shared server store for several replicas can
/// implement the same interface, each replica keeping its own vector index fed from <see cref="ReadVectors"/>.
/// Every method may throw <see cref="StoreException"/>; callers treat that as "no cache" and fail open.
/// </summary>
public interface IRewriteStore : IAsyncDisposable
{
    /// <summary>Creates the store if needed and applies the numbered migrations.</summary>
    void Open();

    /// <summary>The entry of this scope with this normalised question, if one is younger than <paramref name="minCreated"/>.</summary>
    StoredEntry? FindExact(string scopeKey, string normalized, DateTimeOffset minCreated);

    /// <summary>An entry by id, if it still exists and is younger than <paramref name="minCreated"/>.</summary>
    StoredEntry? Get(long id, DateTimeOffset minCreated);

    /// <summary>Every stored vector of one embedding model, to rebuild the index at start.</summary>
    IEnumerable<IndexRow> ReadVectors(string modelId);

    /// <summary>Stores an entry (replacing the one of the same scope and question); completes once committed.</summary>
    Task<long> AddAsync(NewEntry entry, CancellationToken cancel);

    /// <summary>Counts a hit; written in the background, never awaited by a response.</summary>
    void RecordHit(long id, DateTimeOffset at);

    /// <summary>Adds to a per-lane tally (see <see cref="Tally"/>) in the background.</summary>
    void Count(string lane, string name, long by = 1);

    /// <summary>Appends to the event log in the background.</summary>
    void AppendEvent(EventRow row);

    /// <summary>Learned prompt templates younger than <paramref name="minLearned"/>, to make them known again at start.</summary>
    IReadOnlyList<TemplateRow> Templates(DateTimeOffset minLearned);

    /// <summary>Keeps a newly learned template (in the background; the same key, prefix and suffix are kept once).</summary>
    void SaveTemplate(TemplateRow row);

    /// <summary>Deletes the matching entries (and the learned templates of a lane or partition); returns the entries' ids.</summary>
    Task<IReadOnlyList<long>> PurgeAsync(PurgeFilter filter, CancellationToken cancel);

    /// <summary>Waits until everything queued so far is written.</summary>
    Task FlushAsync(CancellationToken cancel);

    StoreStats Stats();

    /// <summary>Raised with the ids of entries removed by eviction, expiry or purge, so the index forgets them.</summary>
    event Action<IReadOnlyList<long>>? Removed;

    /// <summary>Raised when the store was found gone and started anew empty; the index must be cleared.</summary>
    event Action? Reset;
}
