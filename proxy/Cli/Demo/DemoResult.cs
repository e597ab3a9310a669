namespace RewriteProxy.Cli.Demo;

/// <summary>How a demo run is set up. Defaults: the command's defaults.</summary>
public sealed record DemoSettings
{
    public const int DefaultSeed = 7;
    public const int DefaultCalls = 300;

    /// <summary>Concurrent clients: enough to overlap the scripted upstream's delays on a small machine.</summary>
    public const int DefaultClients = 4;

    /// <summary>Relative to the current directory, which <c>dotnet run</c> leaves where it was typed (RewriteProxy.csproj).</summary>
    public const string DefaultOut = "demo-report";

    public int Seed { get; init; } = DefaultSeed;
    public int Calls { get; init; } = DefaultCalls;
    public int Clients { get; init; } = DefaultClients;
    /// <summary>Keep the temporary store (its path is printed) instead of deleting it at the end.</summary>
    public bool Keep { get; init; }
    /// <summary>Folder for the run's summary and tuning report; null writes nothing.</summary>
    public string? OutDirectory { get; init; } = DefaultOut;
}

/// <summary>One call as the demo's client saw it.</summary>
/// <param name="Call">What was asked, on which lane, and why.</param>
/// <param name="Status">The HTTP status of the answer.</param>
/// <param name="Cache">The <c>X-Rewrite-Cache</c> header: hit-exact, hit-semantic, miss, bypass (empty when absent).</param>
/// <param name="Similarity">The <c>X-Rewrite-Similarity</c> header of a semantic hit.</param>
/// <param name="Dropped">The <c>X-Rewrite-Dropped</c> header (0 when absent).</param>
/// <param name="SavedTokens">The <c>X-Rewrite-Saved-Tokens</c> header of a hit (0 otherwise).</param>
/// <param name="Fallback">The answer carries <c>X-Rewrite-Fallback</c>: the question stood in for a drifting draft.</param>
/// <param name="Milliseconds">From sending the request to reading the whole body, on the client.</param>
public sealed record DemoObservation(DemoCall Call, int Status, string Cache, double? Similarity, int Dropped, long SavedTokens,
    bool Fallback, double Milliseconds)
{
    public bool IsHit => Cache is "hit-exact" or "hit-semantic";
}

/// <summary>Latency percentiles in milliseconds (nearest rank); null when there was no such call.</summary>
public sealed record Latency(int Count, double? P50, double? P95);

/// <summary>What one lane did during the run, as the client observed it, plus the drop and refusal counts from /metrics.</summary>
public sealed record LaneSummary
{
    public required string Lane { get; init; }
    public int Calls { get; init; }
    public int ExactHits { get; init; }
    public int SemanticHits { get; init; }
    public int Misses { get; init; }
    public int Bypass { get; init; }
    /// <summary>Answers with a status other than 200.</summary>
    public int Errors { get; init; }
    /// <summary>Chat completions the scripted upstream answered for this lane (draft retries included).</summary>
    public int UpstreamCalls { get; init; }
    /// <summary>Calls answered from the cache: each would have cost at least one upstream call.</summary>
    public int UpstreamCallsSaved => ExactHits + SemanticHits;
    public long TokensSaved { get; init; }
    /// <summary>Drafts that drifted on every attempt: the question was returned in their place.</summary>
    public int Fallbacks { get; init; }
    public required IReadOnlyDictionary<string, long> DropsByReason { get; init; }
    public required IReadOnlyDictionary<string, long> GuardRefusalsByReason { get; init; }
    public required Latency HitLatency { get; init; }
    public required Latency MissLatency { get; init; }
    public int Paraphrases { get; init; }
    public int ParaphrasesServed { get; init; }
    public int NearMisses { get; init; }
    /// <summary>Near-misses answered by the upstream, not the cache: all of them is the only right answer.</summary>
    public int NearMissesNotServed { get; init; }
}

/// <summary>One count seen up to three ways: by the client (response headers), in /metrics, in the store; null where that
/// source does not hold it (the client never sees drop reasons or guard refusals).</summary>
public sealed record Reconciliation(string Lane, string What, long? Observed, long? Metrics, long? Store)
{
    public bool Agrees => new[] { Observed, Metrics, Store }.OfType<long>().Distinct().Count() <= 1;
}

/// <summary>Everything a demo run found; <see cref="Succeeded"/> is the exit status.</summary>
public sealed record DemoResult
{
    public required DemoSettings Settings { get; init; }
    public required TimeSpan Wall { get; init; }
    public required IReadOnlyList<LaneSummary> Lanes { get; init; }
    public required IReadOnlyList<Reconciliation> Checks { get; init; }
    public required IReadOnlyList<DemoObservation> Observations { get; init; }
    public required Uri UpstreamBaseUrl { get; init; }
    /// <summary>The store's path when it was kept; null when it was deleted.</summary>
    public string? KeptStore { get; init; }
    /// <summary>Files written under <see cref="DemoSettings.OutDirectory"/>.</summary>
    public IReadOnlyList<string> Written { get; init; } = [];

    public bool CountsAgree => Checks.All(c => c.Agrees);
    public bool NearMissesKeptApart => Lanes.All(l => l.NearMissesNotServed == l.NearMisses);
    public bool Succeeded => CountsAgree && NearMissesKeptApart && Lanes.All(l => l.Errors == 0);
}

/// <summary>The demo cannot run (bad configuration, a lane missing): one line for the operator.</summary>
public sealed class DemoException(string message, Exception? inner = null) : Exception(message, inner);
