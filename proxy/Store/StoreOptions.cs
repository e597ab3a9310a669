namespace RewriteProxy.Store;

/// <summary>Which implementation of <see cref="IRewriteStore"/> holds the cache (<c>Store:Provider</c>).</summary>
public enum StoreProvider
{
    /// <summary>One file beside the process (<c>Store:Path</c>): one proxy process.</summary>
    Sqlite,
    /// <summary>A shared database server (<c>Store:ConnectionString</c>): several proxy replicas share one cache.</summary>
    Postgres,
}

/// <summary>Where entries live and how many (<c>Store:*</c>).</summary>
public sealed record StoreOptions
{
    /// <summary>
    /// Which store holds the cache. Default <c>sqlite</c>: embedded, nothing to run beside the proxy; <c>postgres</c>
    /// when several replicas must share one cache.
    /// </summary>
    public StoreProvider Provider { get; init; } = StoreProvider.Sqlite;

    /// <summary>
    /// The shared database for <c>postgres</c>, in Npgsql's keyword format (<c>Host=db;Username=...;Password=...</c>);
    /// ignored for <c>sqlite</c>. A secret: never logged or shown (see <see cref="PrintMembers"/>). Default none.
    /// </summary>
    public string? ConnectionString { get; init; }

    /// <summary>
    /// SQLite file of the cache. Default <c>data/rewriteproxy.db</c>, relative to the working directory: beside the
    /// shipped <c>config/</c> folder when run from a checkout (the container sets <c>/data/rewriteproxy.db</c>).
    /// </summary>
    public string Path { get; init; } = DefaultPath;

    const string DefaultPath = "data/rewriteproxy.db";

    /// <summary>
    /// Most entries kept; the least recently hit go first. Default 100 000: their question vectors take about
    /// 150 MiB of memory in the index (1.5 KiB each at 384 dimensions), a size a small instance holds.
    /// </summary>
    public long MaxEntries { get; init; } = 100_000;

    /// <summary>
    /// Age after which an entry is no longer served and is deleted. Default 7 days: long enough for a weekly rhythm
    /// of questions to repeat, short enough that rewrites about facts that change age out.
    /// </summary>
    public TimeSpan Ttl { get; init; } = TimeSpan.FromDays(7);

    /// <summary>
    /// Longest a miss waits for another replica that is already asking upstream the same question (a shared store only),
    /// before it asks upstream itself. Default 15 s: longer than a rewrite call usually takes (a few seconds, from
    /// memory), and short enough that a caller whose replica died mid-call still gets its own answer well within
    /// <c>Upstream:Timeout</c>.
    /// </summary>
    public TimeSpan ClaimWait { get; init; } = TimeSpan.FromSeconds(15);

    /// <summary>
    /// Where the vector index is saved, to be reloaded at start instead of rebuilt; empty turns snapshots off.
    /// Default <see cref="SnapshotPathFor"/>: beside the SQLite file, or under <c>data/</c> for a shared database.
    /// </summary>
    public string IndexSnapshotPath { get; init; } = SnapshotPathFor(StoreProvider.Sqlite, DefaultPath);

    /// <summary>
    /// How often the index is saved while it changes (also once after a rebuild, and on a graceful stop). Default 15
    /// minutes: a crash costs the next start a replay of at most that much of the store's change feed (kept 24 hours)
    /// instead of a rebuild (32 minutes at 1M entries), and a save holds nobody: 1 s at 100k entries, 10–16 s of
    /// background I/O at 1M, index writers held under 10 ms, lookups never (docs/measurements/snapshots.md).
    /// </summary>
    public TimeSpan IndexSnapshotInterval { get; init; } = TimeSpan.FromMinutes(15);

    /// <summary>The default snapshot path of a provider: <c>{Store:Path}.index</c>, or <c>data/rewriteproxy.index</c>.</summary>
    public static string SnapshotPathFor(StoreProvider provider, string path) =>
        provider == StoreProvider.Sqlite ? path + ".index" : "data/rewriteproxy.index";

    /// <summary>Records print every property: the connection string (it may hold a password) is printed as set or not, never its text.</summary>
    bool PrintMembers(System.Text.StringBuilder builder)
    {
        builder.Append($"Provider = {Provider}, Path = {Path}, ConnectionString = {(ConnectionString is null ? "(none)" : "(set)")}, ");
        builder.Append($"MaxEntries = {MaxEntries}, Ttl = {Ttl}, ClaimWait = {ClaimWait}, IndexSnapshotPath = {IndexSnapshotPath}, ");
        builder.Append($"IndexSnapshotInterval = {IndexSnapshotInterval}");
        return true;
    }
}

/// <summary>The event log of guarded rewrites and anchor-guard refusals, kept in the store (<c>Events:*</c>).</summary>
public sealed record EventsOptions
{
    /// <summary>Write guarded rewrites and guard refusals to the event log. Default true: <c>rewriteproxy tune</c> reads it.</summary>
    public bool Enabled { get; init; } = true;

    /// <summary>Events older than this are deleted. Default 7 days, the window <c>rewriteproxy tune</c> reads by default.</summary>
    public TimeSpan Retention { get; init; } = TimeSpan.FromDays(7);

    /// <summary>
    /// Most events kept; the oldest go first. Default 1 000 000: bounds the file on a busy deployment, and tune still
    /// reads that many in seconds (7.8 s measured, docs/measurements/tune.md).
    /// </summary>
    public long MaxRows { get; init; } = 1_000_000;
}
