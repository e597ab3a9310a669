using BenchmarkDotNet.Attributes;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;

namespace RewriteProxy.Benchmarks.Decision;

/// <summary>
/// What the hit decision adds to a semantic lookup, measured against the lookup itself in the same run. Baseline: the
/// semantic lookup's own work for one question (the question embedded by the ONNX model, a scope of 1,000 entries
/// searched). Then the per-candidate work: the anchor guard of before issue #12 (anchors of both questions extracted,
/// compared), the decision as SemanticCache runs it per candidate (the stored question read, then decided; the asked
/// question is read once per lookup), and the decision with both questions read. One operation = one lookup or one
/// candidate pair.
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

    const int ScopeEntries = 1000;
    const string Scope = "bench-scope";

    readonly AnchorGuard _guard = new();
    HitDecision _decision = null!;
    HitQuestion[] _asked = null!;
    OnnxEmbedder _embedder = null!;
    VectorIndex _index = null!;
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
        _asked = Pairs.Select(p => _decision.Read(p.Asked)).ToArray();
        _embedder = OnnxEmbedder.Load(new EmbeddingOptions());
        _index = new VectorIndex(_embedder.Dimension);
        var random = new Random(12);
        for (var id = 0; id < ScopeEntries; id++)
        {
            var v = new float[_embedder.Dimension];
            for (var d = 0; d < v.Length; d++) v[d] = (float)(random.NextDouble() - 0.5);
            System.Numerics.Tensors.TensorPrimitives.Divide(v, System.Numerics.Tensors.TensorPrimitives.Norm<float>(v), v);
            _index.Add(Scope, id, v);
        }
    }

    [GlobalCleanup]
    public void Cleanup() => _embedder.Dispose();

    [Benchmark(Baseline = true, Description = "lookup: embed the question, search 1,000 entries")]
    public int Lookup()
    {
        var (asked, _) = Pairs[_next++ % Pairs.Length];
        return _index.Search(Scope, _embedder.Embed(asked), SemanticCache.Candidates, 0.55f).Count;
    }

    [Benchmark(Description = "before #12: anchor guard (extract both, compare)")]
    public bool AnchorGuardOnly()
    {
        var (asked, cached) = Pairs[_next++ % Pairs.Length];
        return _guard.Compare(_guard.Extract(asked), _guard.Extract(cached)).Agree;
    }

    [Benchmark(Description = "per candidate: read the stored question, decide")]
    public bool DecisionPerCandidate()
    {
        var i = _next++ % Pairs.Length;
        return _decision.Decide(_asked[i], _decision.Read(Pairs[i].Cached), 0.9).Agree;
    }

    [Benchmark(Description = "hit decision (read both, decide)")]
    public bool Decision()
    {
        var (asked, cached) = Pairs[_next++ % Pairs.Length];
        return _decision.Decide(_decision.Read(asked), _decision.Read(cached), 0.9).Agree;
    }
}
