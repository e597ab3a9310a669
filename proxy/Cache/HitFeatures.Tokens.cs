using RewriteProxy.Embedding;

namespace RewriteProxy.Cache;

/// <summary>
/// Candidate signals from the model's own per-word states (<see cref="TokenStates"/>), after BERTScore (Zhang et al., ICLR
/// 2020: each word of one text greedily matched by cosine to its best counterpart in the other, precision, recall and F1;
/// no idf weighting, no baseline rescaling, which a standardised logistic combiner does not need): a word WordNet does not
/// pair with anything may still have a counterpart in context ("pause" / "freeze" a membership). Not in the shipped
/// combiner: measured by HitCombinerTrainingTokenTests (docs/measurements/precision.md, "Per-token states").
/// </summary>
internal static partial class HitFeatures
{
    public static readonly string[] TokenNames =
    [
        "token_f1", "token_min_pr", "content_f1", "novel_match_mean", "novel_match_min", "novel_unmatched",
    ];

    /// <summary>Best-match cosine under which an unexplained content word counts as having no counterpart (measured: 0.5–0.7 on dev).</summary>
    public const double MatchFloor = 0.6;

    /// <summary>The signals of <see cref="TokenNames"/> for one pair; <paramref name="weight"/> is BERTScore's idf weight of a word
    /// (the decision's spelling), null weighing every word 1.</summary>
    public static double[] OfTokens(HitQuestion asked, HitQuestion cached, QuestionDiff diff, TokenStates askedStates, TokenStates cachedStates,
        double matchFloor = MatchFloor, Func<string, double>? weight = null)
    {
        weight ??= _ => 1;
        var a = WordVectors(asked.Words, askedStates);
        var c = WordVectors(cached.Words, cachedStates);
        var (pa, rc) = Score(Present(asked.Words, a, _ => true, weight), Present(cached.Words, c, _ => true, weight));
        var (ca, cc) = Score(Present(asked.Words, a, k => asked.Words.Classes[k] == WordClass.Content, weight),
            Present(cached.Words, c, k => cached.Words.Classes[k] == WordClass.Content, weight));
        var best = new List<double>();
        foreach (var (gapA, gapC) in diff.Gaps)
        {
            foreach (var k in gapA) if (Best(asked.Words, a, k, cached.Words, c) is { } b) best.Add(b);
            foreach (var k in gapC) if (Best(cached.Words, c, k, asked.Words, a) is { } b) best.Add(b);
        }
        return
        [
            F1(pa, rc),
            Math.Min(pa, rc),
            F1(ca, cc),
            best.Count == 0 ? 1 : best.Average(),
            best.Count == 0 ? 1 : best.Min(),
            best.Count(b => b < matchFloor),
        ];
    }

    static double F1(double p, double r) => p + r <= 0 ? 0 : 2 * p * r / (p + r);

    /// <summary>Each side's weighted mean best-match cosine against the other (BERTScore's precision and recall, the texts taken in turn).</summary>
    static (double, double) Score(List<(float[] Vector, double Weight)> x, List<(float[] Vector, double Weight)> y)
    {
        if (x.Count == 0 || y.Count == 0) return (0, 0);
        return (Side(x, y), Side(y, x));

        static double Side(List<(float[] Vector, double Weight)> from, List<(float[] Vector, double Weight)> to) =>
            from.Sum(v => v.Weight * to.Max(u => (double)VectorMath.Dot(v.Vector, u.Vector))) / Math.Max(1e-9, from.Sum(v => v.Weight));
    }

    static List<(float[], double)> Present(QuestionWords q, float[]?[] vectors, Func<int, bool> which, Func<string, double> weight)
    {
        var list = new List<(float[], double)>();
        for (var k = 0; k < vectors.Length; k++) if (vectors[k] is { } v && which(k)) list.Add((v, weight(q.Words[k])));
        return list;
    }

    /// <summary>
    /// Best cosine of unexplained word <paramref name="k"/> (content, or a particle that replaced another) to a content word or
    /// particle of the other question; null for a word without a state. Particles count: a gap of "in" against "out" alone
    /// must not read as fully matched.
    /// </summary>
    static double? Best(QuestionWords q, float[]?[] vectors, int k, QuestionWords other, float[]?[] otherVectors)
    {
        if (!Open(q.Classes[k]) || vectors[k] is not { } v) return null;
        double best = 0;
        for (var j = 0; j < other.Count; j++)
            if (Open(other.Classes[j]) && otherVectors[j] is { } u) best = Math.Max(best, VectorMath.Dot(v, u));
        return best;
    }

    static bool Open(WordClass c) => c is WordClass.Content or WordClass.Particle;

    /// <summary>
    /// The alignment with one more explanation beside WordNet's: an unexplained content word whose best counterpart in context
    /// has cosine ≥ <paramref name="floor"/> counts as explained, so that the shipped features read the rest. A particle left
    /// alone on one side no longer counts, as in <see cref="QuestionDiff.Compare"/>.
    /// </summary>
    public static QuestionDiff Explain(HitQuestion asked, HitQuestion cached, QuestionDiff diff, TokenStates askedStates, TokenStates cachedStates, double floor)
    {
        var a = WordVectors(asked.Words, askedStates);
        var c = WordVectors(cached.Words, cachedStates);
        var novelA = new List<string>();
        var novelC = new List<string>();
        var gaps = new List<(int[], int[])>();
        int substitutions = 0, explained = 0;
        foreach (var (gapA, gapC) in diff.Gaps)
        {
            var na = gapA.Where(k => !(asked.Words.Classes[k] == WordClass.Content && Best(asked.Words, a, k, cached.Words, c) >= floor)).ToList();
            var nc = gapC.Where(k => !(cached.Words.Classes[k] == WordClass.Content && Best(cached.Words, c, k, asked.Words, a) >= floor)).ToList();
            explained += gapA.Length - na.Count + gapC.Length - nc.Count;
            if (na.Count == 0 || nc.Count == 0)
            {
                na.RemoveAll(k => asked.Words.Classes[k] != WordClass.Content);
                nc.RemoveAll(k => cached.Words.Classes[k] != WordClass.Content);
            }
            novelA.AddRange(na.Select(k => asked.Words.Words[k]));
            novelC.AddRange(nc.Select(k => cached.Words.Words[k]));
            if (na.Count > 0 && nc.Count > 0) substitutions++;
            if (na.Count > 0 || nc.Count > 0) gaps.Add(([.. na], [.. nc]));
        }
        return new QuestionDiff(novelA, novelC, substitutions, diff.Swap) { Gaps = gaps, Aligned = diff.Aligned, ExplainedWords = diff.ExplainedWords + explained };
    }

    /// <summary>
    /// The state of each of the decision's words: the next model word spelled the same, within a few words (the model also
    /// has the apostrophes and hyphens the decision drops: "driver's" is "driver ' s"). A word not found ("ca" of "can't",
    /// a word with an accent) has none.
    /// </summary>
    static float[]?[] WordVectors(QuestionWords q, TokenStates states)
    {
        const int lookAhead = 3;
        var vectors = new float[]?[q.Count];
        var next = 0;
        for (var k = 0; k < q.Count; k++)
            for (var w = next; w < Math.Min(states.Words.Count, next + lookAhead); w++)
                if (states.Words[w] == q.Words[k])
                {
                    vectors[k] = states.Vectors[w];
                    next = w + 1;
                    break;
                }
        return vectors;
    }
}
