using System.Text;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Telemetry;
using RewriteProxy.Tests.Corpus;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>One labelled pair of the hit corpus (tests/corpus/hit-pairs): the cached question is stored, the asked one then asked.</summary>
public sealed record CorpusPair(string Part, string Id, string Domain, string Family, string Label, string Cached, string Asked, string Source)
{
    public bool IsParaphrase => Label == "paraphrase";
}

/// <summary>A pair as the proxy sees it: similarity of the two question vectors, today's verdict (anchor guard) and the hit decision's.</summary>
public sealed record MeasuredPair(CorpusPair Pair, double Similarity, AnchorVerdict Today, AnchorVerdict Decision)
{
    /// <summary>Served at <paramref name="hitSimilarity"/> by similarity alone, as the vector index finds candidates.</summary>
    public bool ServedByCosine(double hitSimilarity) => Similarity >= hitSimilarity;

    public bool ServedToday(double hitSimilarity) => ServedByCosine(hitSimilarity) && Today.Agree;

    public bool ServedByDecision(double hitSimilarity) => ServedByCosine(hitSimilarity) && Decision.Agree;
}

/// <summary>
/// Runs the real embedder (our ONNX all-MiniLM-L6-v2, as the proxy loads it) and the real decision over every pair of
/// the hit corpus. Embeddings are computed once per test run and shared by every test that measures.
/// </summary>
public static class HitCorpusMeasure
{
    public static readonly string[] Parts = ["dev", "test"];

    static readonly Lazy<IReadOnlyList<CorpusPair>> AllPairs = new(LoadAll);
    static readonly Lock Gate = new();
    static readonly Dictionary<string, float[]> VectorsByText = new(StringComparer.Ordinal);

    public static IReadOnlyList<CorpusPair> Pairs => AllPairs.Value;

    static IReadOnlyList<CorpusPair> LoadAll() =>
    [
        .. HitCorpus.Load(CorpusPart.Dev).Select(p => From("dev", p)),
        .. HitCorpus.Load(CorpusPart.Test).Select(p => From("test", p)),
    ];

    static CorpusPair From(string part, HitPair p) => new(part, p.Id, p.Domain, p.Family, p.Label, p.Cached, p.Asked, p.Source);

    /// <summary>Vectors of every corpus question from <paramref name="embedder"/>, batched, each text once per run.</summary>
    public static IReadOnlyDictionary<string, float[]> Vectors(IEmbedder embedder)
    {
        lock (Gate)
        {
            var missing = Pairs.SelectMany(p => new[] { p.Cached, p.Asked }).Distinct(StringComparer.Ordinal)
                .Where(t => !VectorsByText.ContainsKey(t)).ToList();
            foreach (var batch in missing.Chunk(32))
            {
                var vectors = embedder.Embed(batch);
                for (var i = 0; i < batch.Length; i++) VectorsByText[batch[i]] = vectors[i];
            }
            return new Dictionary<string, float[]>(VectorsByText, StringComparer.Ordinal);
        }
    }

    /// <summary>Every pair of <paramref name="parts"/> (default: both) through similarity, the anchor guard alone and the decision.</summary>
    public static IReadOnlyList<MeasuredPair> Measure(HitDecision? decision = null, IReadOnlyCollection<string>? parts = null)
    {
        var guard = new AnchorGuard();
        decision ??= new HitDecision(guard);
        var vectors = Vectors(SharedEmbedder.Instance);
        return Pairs.Where(p => parts is null || parts.Contains(p.Part)).Select(p =>
        {
            var similarity = VectorMath.Dot(vectors[p.Asked], vectors[p.Cached]);
            return new MeasuredPair(p, similarity, guard.Compare(p.Asked, p.Cached), decision.Decide(p.Asked, p.Cached, similarity));
        }).ToList();
    }

    /// <summary>The verdict's metric label, or "serve".</summary>
    public static string Label(AnchorVerdict verdict) => verdict.Reason is { } reason ? LabelValue.Of(reason) : "serve";

    /// <summary>Tab-separated, one pair a line: for reading the dev part's misses in a spreadsheet or with awk.</summary>
    public static void Dump(IEnumerable<MeasuredPair> measured, string path)
    {
        var text = new StringBuilder("part\tid\tfamily\tlabel\tsimilarity\ttoday\tdecision\tdetail\tcached\tasked\n");
        foreach (var m in measured)
            text.Append($"{m.Pair.Part}\t{m.Pair.Id}\t{m.Pair.Family}\t{m.Pair.Label}\t{m.Similarity:F3}\t{Label(m.Today)}\t{Label(m.Decision)}\t{m.Decision.Detail}\t{m.Pair.Cached}\t{m.Pair.Asked}\n");
        File.WriteAllText(path, text.ToString());
    }
}
