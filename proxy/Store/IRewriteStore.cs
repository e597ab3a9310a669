using RewriteProxy.Cache;

namespace RewriteProxy.Store;

/// <summary>
/// Where entries, events, tallies, templates and in-flight claims live. Two implementations: SQLite (the embedded
/// default, one process) and PostgreSQL (several replicas share it). Nothing outside the implementations knows which
/// one is behind it: no casts, no SQL, no file paths.
/// Every member that touches I/O is asynchronous. Every method may throw <see cref="StoreException"/>; callers on the
/// request path treat that as "no cache" and fail open.
/// </summary>
public interface IRewriteStore : IAsyncDisposable
{
    /// <summary>Where the store is, for logs, messages and stats, never with a password: "sqlite /data/rewriteproxy.db", "postgres rewriteproxy@db:5432".</summary>
    string Location { get; }

    /// <summary>
    /// Connects, and in <see cref="StoreAccess.ReadWrite"/> creates the store if needed and applies the numbered
    /// migrations (safe when several replicas start at once). <see cref="StoreAccess.ReadOnly"/> never creates or
    /// migrates anything and starts no background writer (the CLI's stats, tune and purge --dry-run).
    /// </summary>
    /// <exception cref="StoreException">cannot connect, the store is missing (read-only), damaged, or of a newer schema.</exception>
    Task OpenAsync(StoreAccess access, CancellationToken cancel);

    /// <summary>A random id made when the store was created; a store made anew (SQLite file lost) has another. Index snapshots record it.</summary>
    string StoreId { get; }

    // --- hit path ---------------------------------------------------------------------------------------------

    /// <summary>The entry of this scope with this normalised question, if one is younger than <paramref name="minCreated"/>.</summary>
    ValueTask<StoredEntry?> FindExactAsync(string scopeKey, string normalized, DateTimeOffset minCreated, CancellationToken cancel);

    /// <summary>An entry by id, if it still exists and is younger than <paramref name="minCreated"/>.</summary>
    ValueTask<StoredEntry?> GetAsync(long id, DateTimeOffset minCreated, CancellationToken cancel);

    // --- the vector index's feed -------------------------------------------------------------------------------

    /// <summary>
    /// Every stored vector of one embedding model (start-up rebuild), and the change sequence the rows are at least as
    /// new as: replaying changes after <see cref="VectorLoad.Sequence"/> over them is correct (changes are idempotent).
    /// </summary>
    Task<VectorLoad> ReadVectorsAsync(string modelId, CancellationToken cancel);

    /// <summary>
    /// Committed changes after <paramref name="afterSequence"/>, oldest first, at most <paramref name="limit"/>.
    /// Null when the store no longer holds all of them (pruned, or the store was made anew): rebuild from
    /// <see cref="ReadVectorsAsync"/>. Sequences increase in commit order, so a reader never skips one committed late.
    /// </summary>
    Task<IReadOnlyList<StoreChange>?> ChangesAfterAsync(long afterSequence, int limit, CancellationToken cancel);

    /// <summary>
    /// Raised, without payload and on any thread, when new changes may be there: after this process's commits, and on
    /// a notification from another replica. Followers then call <see cref="ChangesAfterAsync"/>; they also poll, so a
    /// lost notification (a reconnect) delays a change, never loses it.
    /// </summary>
    event Action? ChangesAvailable;

    // --- writes -----------------------------------------------------------------------------------------------

    /// <summary>Stores an entry (replacing the one of the same scope and question, which keeps its id); completes once committed.</summary>
    Task<long> AddAsync(NewEntry entry, CancellationToken cancel);

    /// <summary>Counts a hit; written in the background, never awaited by a response, never throws.</summary>
    void RecordHit(long id, DateTimeOffset at);

    /// <summary>Adds to a per-lane tally (see <see cref="Tally"/>) in the background; never throws.</summary>
    void Count(string lane, string name, long by = 1);

    /// <summary>Appends to the event log in the background; never throws.</summary>
    void AppendEvent(EventRow row);

    /// <summary>Keeps a newly learned template (in the background; the same key, prefix and suffix are kept once).</summary>
    void SaveTemplate(TemplateRow row);

    /// <summary>Deletes the matching entries (and the learned templates of a lane or partition); returns the entries' ids.</summary>
    /// <exception cref="ArgumentException">the filter is empty.</exception>
    Task<IReadOnlyList<long>> PurgeAsync(PurgeFilter filter, CancellationToken cancel);

    /// <summary>Waits until everything queued so far is written.</summary>
    Task FlushAsync(CancellationToken cancel);

    // --- single flight across processes ---------------------------------------------------------------------

    /// <summary>
    /// Claims the miss of (scope, normalised question) for this process for at most <paramref name="hold"/>.
    /// False when another live process holds the claim. A store used by one process only may always answer true.
    /// A claim not released in time lapses (a crashed holder never blocks others for longer than <paramref name="hold"/>).
    /// </summary>
    Task<bool> ClaimMissAsync(string scopeKey, string normalized, TimeSpan hold, CancellationToken cancel);

    /// <summary>Releases this process's claim (whether or not an entry was stored), and tells waiting processes.</summary>
    Task ReleaseMissAsync(string scopeKey, string normalized, CancellationToken cancel);

    /// <summary>True while some process holds an unexpired claim on (scope, normalised question).</summary>
    Task<bool> IsClaimedAsync(string scopeKey, string normalized, CancellationToken cancel);

    // --- reading for operators (admin API, CLI, demo, tune) ----------------------------------------------------

    Task<IReadOnlyList<TemplateRow>> TemplatesAsync(DateTimeOffset minLearned, CancellationToken cancel);

    Task<StoreStats> StatsAsync(CancellationToken cancel);

    /// <summary>Entries by filter, most recently hit first.</summary>
    Task<IReadOnlyList<StoredEntry>> ListAsync(EntryQuery query, CancellationToken cancel);

    /// <summary>Event-log rows of a lane (or all lanes) since a time, oldest first, texts included (demo, admin).</summary>
    IAsyncEnumerable<EventRow> EventsAsync(string? lane, DateTimeOffset since, CancellationToken cancel);

    /// <summary>The scored columns only of rewrite and guard events (tune): a million of them fit in tens of MB.</summary>
    IAsyncEnumerable<ScoredEvent> ScoredEventsAsync(string lane, DateTimeOffset since, CancellationToken cancel);

    /// <summary>How many entries a purge with this filter would delete now (purge --dry-run); the same condition as <see cref="PurgeAsync"/>.</summary>
    Task<long> CountMatchingAsync(PurgeFilter filter, CancellationToken cancel);
}

/// <summary>How <see cref="IRewriteStore.OpenAsync"/> opens the store.</summary>
public enum StoreAccess { ReadWrite, ReadOnly }

/// <summary>Vectors for an index rebuild, and the change sequence they are current to.</summary>
public sealed record VectorLoad(IReadOnlyList<IndexRow> Rows, long Sequence);

/// <summary>What happened to an entry: stored or replaced (with its vector when it has one), or deleted.</summary>
public enum ChangeKind { Put, Delete }

/// <summary>One committed change, as the vector index and the hot-entry cache of every process apply it.</summary>
/// <param name="Sequence">Its place in the store's commit order.</param>
/// <param name="EntryId">The entry changed.</param>
/// <param name="Kind">Stored (or replaced), or deleted.</param>
/// <param name="ScopeKey">The entry's scope (a put); null for a delete.</param>
/// <param name="Vector">Null for a delete, and for an entry stored without a vector (exact-only).</param>
/// <param name="ModelId">The embedding model that made <paramref name="Vector"/>.</param>
public sealed record StoreChange(long Sequence, long EntryId, ChangeKind Kind, string? ScopeKey, float[]? Vector, string? ModelId);

/// <summary>A listing's filter: null fields match everything.</summary>
public sealed record EntryQuery(string? Lane = null, string? PartitionHash = null, string? Contains = null, int Limit = 50);

/// <summary>An event's scored columns, for tune.</summary>
public sealed record ScoredEvent(DateTimeOffset At, string Kind, string Verdict, double Score, string? Reason);
