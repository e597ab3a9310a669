using System.Numerics.Tensors;
using RewriteProxy.Guard;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Guard;

/// <summary>
/// Why the never-empty fallback is the question: a measurement on the labelled list
/// (Data/drift-labels.jsonl, invented scenarios) with the proxy's own model.
/// </summary>
public sealed class SiblingFallbackTests(ITestOutputHelper output)
{
    /// <summary>The shipped siblings MaxDrift (DriftDefaults), at which the guard drops for drift.</summary>
    const double MaxDrift = DriftDefaults.SiblingMaxDrift;

    static double Cos(float[] a, float[] b) => TensorPrimitives.CosineSimilarity(a, b);

    /// <summary>
    /// For every question, the siblings the guard drops for drift are what an all-dropped completion is made of. The
    /// least drifted of them is the alternative fallback. Compared with the question by (a) how often that candidate
    /// is on topic, and (b) mean cosine to the question's on-topic siblings, a stand-in for the documents retrieval
    /// should find.
    /// </summary>
    [Fact]
    public void Least_drifted_dropped_sibling_is_mostly_off_topic_and_the_question_is_closer_to_the_on_topic_siblings()
    {
        var embedder = Fixtures.SharedEmbedder.Instance;
        int cases = 0, leastOn = 0;
        double questionToOn = 0, leastToOn = 0;
        foreach (var label in DriftLabel.Load())
        {
            var all = label.SiblingsOn.Select(s => (Text: s, On: true)).Concat(label.SiblingsOff.Select(s => (Text: s, On: false))).ToList();
            var vectors = embedder.Embed([label.Question, .. all.Select(a => a.Text)]);
            var q = vectors[0];
            var dropped = all.Select((a, i) => (a.Text, a.On, Drift: 1 - Cos(q, vectors[i + 1]), Vector: vectors[i + 1]))
                .Where(a => a.Drift > MaxDrift).ToList();
            if (dropped.Count == 0) continue;
            cases++;
            var least = dropped.MinBy(d => d.Drift);
            if (least.On) leastOn++;
            var onVectors = all.Select((a, i) => (a.On, V: vectors[i + 1])).Where(a => a.On).Select(a => a.V).ToList();
            questionToOn += onVectors.Average(v => Cos(q, v));
            leastToOn += onVectors.Where(v => !ReferenceEquals(v, least.Vector)).DefaultIfEmpty(least.Vector).Average(v => Cos(least.Vector, v));
        }
        output.WriteLine($"questions with a drift drop: {cases}; least-drifted dropped sibling on topic: {leastOn}/{cases}");
        output.WriteLine($"mean cosine to the on-topic siblings: question {questionToOn / cases:0.000}, least-drifted dropped sibling {leastToOn / cases:0.000}");

        Assert.True(cases >= 10);
        Assert.True(leastOn * 2 < cases, "the least-drifted dropped sibling is off topic in most cases");
        Assert.True(questionToOn > leastToOn);
    }
}
