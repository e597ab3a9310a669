namespace RewriteProxy.Cache;

/// <summary>Where entries live and how many (<c>Store:*</c>).</summary>
public sealed record StoreOptions
{
    /// <summary>
    /// SQLite file of the cache. Default <c>data/rewriteproxy.db</c>, relative to the working directory: beside the
    /// shipped <c>config/</c> folder when run from a checkout (the container sets <c>/data/rewriteproxy.db</c>).
    /// </summary>
    public string Path { get; init; } = "data/rewriteproxy.db";

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
