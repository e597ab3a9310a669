using BenchmarkDotNet.Attributes;
using RewriteProxy.Cache;

namespace RewriteProxy.Benchmarks.Decision;

/// <summary>
/// What the hit decision adds to a semantic hit: the per-candidate work of SemanticCache.Lookup today (anchors of
/// both questions extracted, then compared) against the decision (the same, plus words read and aligned). One
/// operation = one candidate pair; the embedding of the question, common to both, is left out.
/// Run: dotnet run -c Release --project tests/RewriteProxy.Benchmarks -- --filter '*HitDecision*'
/// </summary>
[MemoryDiagnoser]
[MedianColumn]
public class HitDecisionBenchmarks
{
    /// <summary>Pairs like the dev part of the hit corpus (invented): paraphrases that are served, and near-misses refused late.</summary>
    static readonly (string Asked, string Cached)[] Pairs =
    [
        ("Can I postpone my final exam if I am ill?", "Can I defer my final exam if I am ill?"),
        ("When does the gym open on bank holidays?", "What time does the gym open on bank holidays?"),
        ("Who marks the second-year history dissertations?", "By whom are the second-year history dissertations marked?"),
        ("If I miss the last tram, is my ticket valid on the night bus?", "Is my ticket valid on the night bus if I miss the last tram?"),
        ("Do I need photo identification to buy a senior pass?", "Do I need a photo ID to buy a senior pass?"),
        ("Do diesel cars have to be returned with a full tank?", "Do petrol cars have to be returned with a full tank?"),
        ("Does the renter reimburse the company for a parking fine received during the rental?", "Does the company reimburse the renter for a parking fine received during the rental?"),
        ("How do I opt out of the salary sacrifice pension scheme?", "How do I opt in to the salary sacrifice pension scheme?"),
    ];

    readonly AnchorGuard _guard = new();
    HitDecision _decision = null!;
    int _next;

    [GlobalSetup]
    public void Setup()
    {
        _decision = new HitDecision(_guard);
        // Load the tables once, outside the measurement, as a running proxy has.
        foreach (var (asked, cached) in Pairs)
        {
            _guard.Compare(asked, cached);
            _decision.Decide(asked, cached, 0.9);
        }
    }

    [Benchmark(Baseline = true, Description = "today: anchor guard (extract both, compare)")]
    public bool Today()
    {
        var (asked, cached) = Pairs[_next++ % Pairs.Length];
        return _guard.Compare(_guard.Extract(asked), _guard.Extract(cached)).Agree;
    }

    [Benchmark(Description = "hit decision (read both, decide)")]
    public bool Decision()
    {
        var (asked, cached) = Pairs[_next++ % Pairs.Length];
        return _decision.Decide(_decision.Read(asked), _decision.Read(cached), 0.9).Agree;
    }
}
