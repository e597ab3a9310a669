namespace RewriteProxy.Store;

/// <summary>A rewrite accepted on a miss, about to be stored.</summary>
public sealed record NewEntry(
    string ScopeKey,
    string PartitionHash,
    string Lane,
    string Question,
    string Normalized,
    float[]? Vector,
    string? ModelId,
    string Content,
    EntryScores Scores,
    string? ResponseModel,
    int PromptTokens,
    int CompletionTokens,
    DateTimeOffset Created);

/// <summary>The drift scores of what an entry holds, so a hit reports what the miss reported.</summary>
/// <param name="MaxDrift">Largest drift among the accepted rewrites; null when nothing was scored.</param>
/// <param name="Dropped">How many rewrites the guard dropped on the miss.</param>
/// <param name="Drifts">Drift of each accepted line (siblings) or of the draft, in order.</param>
public sealed record EntryScores(double? MaxDrift, int Dropped, double[] Drifts)
{
    /// <summary>What an entry whose scores cannot be read reports: nothing scored, nothing dropped.</summary>
    public static EntryScores None { get; } = new(null, 0, []);
}

/// <summary>One stored entry as read back (the vector stays in the index), decoded once by the store.</summary>
/// <param name="Id">The store's id of the entry; the vector index knows it by this id.</param>
/// <param name="ScopeKey">The hashed scope: calls share the entry only when theirs is equal.</param>
/// <param name="PartitionHash">The tenant's partition (a hash, never the credential).</param>
/// <param name="Lane">The lane's name.</param>
/// <param name="Question">The question as it was asked.</param>
/// <param name="Normalized">Its normal form, the key of exact lookups.</param>
/// <param name="Content">What the app was given: the accepted draft, or the kept siblings one per line.</param>
/// <param name="Scores">The drift scores the miss reported, so a hit reports the same.</param>
/// <param name="ResponseModel">The model the upstream named in its answer, repeated in hits.</param>
/// <param name="ModelId">The embedding model that made the question's vector.</param>
/// <param name="PromptTokens">Upstream prompt tokens of the miss: what a hit saves.</param>
/// <param name="CompletionTokens">Upstream completion tokens of the miss: what a hit saves.</param>
/// <param name="Created">When the entry was stored; it is served until <c>Store:Ttl</c> after this.</param>
/// <param name="LastHit">When it was last served (its creation time until then); eviction takes the oldest first.</param>
/// <param name="HitCount">How often it was served.</param>
public sealed record StoredEntry(
    long Id,
    string ScopeKey,
    string PartitionHash,
    string Lane,
    string Question,
    string Normalized,
    string Content,
    EntryScores Scores,
    string? ResponseModel,
    string? ModelId,
    long PromptTokens,
    long CompletionTokens,
    DateTimeOffset Created,
    DateTimeOffset LastHit,
    long HitCount);

/// <summary>A row the vector index is rebuilt from.</summary>
public sealed record IndexRow(long Id, string ScopeKey, float[] Vector);

/// <summary>One event-log row: a guarded rewrite or an anchor-guard refusal. Never a credential.</summary>
/// <param name="At">When it happened.</param>
/// <param name="Lane">The lane's name.</param>
/// <param name="PartitionHash">The caller's partition (a hash, never the credential).</param>
/// <param name="Question">The question asked.</param>
/// <param name="Kind">rewrite (a judged draft or sibling) | guard (a semantic candidate refused by the anchor guard).</param>
/// <param name="Candidate">The rewrite, or the cached question that was refused.</param>
/// <param name="Score">Drift of a rewrite, or similarity of a refused candidate.</param>
/// <param name="Verdict">accepted | dropped (rewrite) or refused (guard).</param>
/// <param name="Reason">Why it was dropped or refused; null when accepted.</param>
public sealed record EventRow(DateTimeOffset At, string Lane, string PartitionHash, string Kind, string Question, string Candidate,
    double Score, string Verdict, string? Reason);

/// <summary>Which entries a purge deletes; null fields match everything, but at least one must be set.</summary>
public sealed record PurgeFilter(string? Lane = null, string? PartitionHash = null, TimeSpan? OlderThan = null, long? Id = null)
{
    public bool IsEmpty => Lane is null && PartitionHash is null && OlderThan is null && Id is null;
}

/// <summary>What one lane has done since the store was created (tallies survive restarts; purges do not reset them).</summary>
public sealed record LaneStats(
    string Lane,
    long Entries,
    long HitExact,
    long HitSemantic,
    long Miss,
    long Bypass,
    long TokensSaved,
    IReadOnlyDictionary<string, long> DropsByReason,
    IReadOnlyDictionary<string, long> RefusalsByReason,
    IReadOnlyDictionary<string, long>? QuestionsBySource = null)
{
    /// <summary>Lane calls by how their question was found (a QuestionSource word, or <c>unlocated</c>).</summary>
    public IReadOnlyDictionary<string, long> Questions => QuestionsBySource ?? new Dictionary<string, long>();

    public long Hits => HitExact + HitSemantic;

    /// <summary>Hits over hits and misses; bypassed calls never gave the cache a chance, so they are left out.</summary>
    public double? HitRatio => Hits + Miss == 0 ? null : (double)Hits / (Hits + Miss);
}

/// <summary>Every lane's figures, the store's size and its learned templates.</summary>
/// <param name="Lanes">Each lane's figures, by lane name.</param>
/// <param name="Bytes">Size on disk: the SQLite file with its WAL and shared-memory files, or the database tables' size.</param>
/// <param name="LearnedTemplates">The learned prompt templates (see <see cref="Templates"/>).</param>
public sealed record StoreStats(IReadOnlyList<LaneStats> Lanes, long Bytes, IReadOnlyList<TemplateRow>? LearnedTemplates = null)
{
    public IReadOnlyList<TemplateRow> Templates => LearnedTemplates ?? [];
}

/// <summary>A prompt template learned from traffic (see Lanes.TemplateLearner), as stored.</summary>
/// <param name="LearnKey">Hash of lane, model, the other messages, parameters and partition: where the template applies.</param>
/// <param name="Lane">The lane's name.</param>
/// <param name="PartitionHash">The partition it was learned in (a hash), so a purge by partition removes it.</param>
/// <param name="Prefix">Stable text before the question.</param>
/// <param name="Suffix">Stable text after the question.</param>
/// <param name="LearnedFrom">Distinct calls it was inferred from.</param>
/// <param name="LearnedAt">When; a template older than Store:Ttl is deleted and learned again from new calls.</param>
public sealed record TemplateRow(string LearnKey, string Lane, string PartitionHash, string Prefix, string Suffix, int LearnedFrom,
    DateTimeOffset LearnedAt);

/// <summary>Names of the store's per-lane tallies.</summary>
public static class Tally
{
    public static string Lookup(string result) => "lookup:" + result;
    public static string Dropped(string reason) => "dropped:" + reason;
    public static string Refused(string reason) => "refused:" + reason;
    public const string TokensSaved = "tokens_saved";
    /// <summary>Lane calls by how the question was found: a QuestionSource word or <c>unlocated</c>.</summary>
    public static string Question(string source) => "question:" + source;
}

/// <summary>The store could not do what was asked (locked, read-only, full, corrupt): the caller fails open.</summary>
public sealed class StoreException(string message, Exception? inner = null) : Exception(message, inner);
