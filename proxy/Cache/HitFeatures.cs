namespace RewriteProxy.Cache;

/// <summary>
/// The signals the learned combiner weighs, for one pair of questions that the hard rules let through: how similar the
/// two are, and what the word alignment left unexplained (how much, in how many places, what kind of words). Each value
/// is symmetric in the two questions. The order is the order of <see cref="Names"/> and of the coefficients file.
/// </summary>
internal static partial class HitFeatures
{
    public static readonly string[] Names =
    [
        "similarity", "novel", "novel_log", "novel_gaps", "substitutions", "one_slot", "novel_share", "aligned_share",
        "explained_share", "length_ratio", "novel_nouns", "novel_specific", "novel_unknown", "kin",
        "novel_imbalance", "broader", "scope_differs", "noun_coverage", "agent_added", "similarity_x_novel",
    ];

    /// <summary>Words that say to whom or what a question applies: a rewording keeps them, a near-miss changes them. Not "each",
    /// "every", "per": rewordings trade those freely ("each shift" / "a shift"), and time frames read them.</summary>
    static readonly HashSet<string> ScopeWords = new(StringComparer.Ordinal) { "all", "only", "some", "any", "whole", "entire", "both", "either", "most" };

    public static double[] Of(HitQuestion askedQuestion, HitQuestion cachedQuestion, QuestionDiff diff, double similarity, WordSenses senses)
    {
        var asked = askedQuestion.Words;
        var cached = cachedQuestion.Words;
        var contentA = Count(asked, WordClass.Content);
        var contentC = Count(cached, WordClass.Content);
        var content = Math.Max(1, contentA + contentC);
        int nouns = 0, specific = 0, unknown = 0, kin = 0, broader = 0;
        foreach (var (gapA, gapC) in diff.Gaps)
        {
            foreach (var (q, k) in gapA.Select(k => (asked, k)).Concat(gapC.Select(k => (cached, k))))
            {
                var lemma = q.Lemmas[k][0];
                var senseCount = senses.SenseCount(lemma);
                if (senseCount == 0) unknown++;
                else if (senseCount <= 2) specific++;
                if (senses.IsNoun(lemma)) nouns++;
            }
            foreach (var i in gapA)
                foreach (var j in gapC)
                {
                    if (senses.Broader(asked.Lemmas[i][0], cached.Lemmas[j][0])) broader++;
                    else if (senses.Kin(asked.Lemmas[i][0], cached.Lemmas[j][0])) kin++;
                }
        }
        var novel = diff.Novel;
        return
        [
            similarity,
            novel,
            Math.Log(1 + novel),
            diff.Gaps.Count,
            diff.Substitutions,
            diff.Gaps.Count == 1 ? 1 : 0,
            (double)novel / content,
            2.0 * diff.Aligned / content,
            (double)diff.ExplainedWords / content,
            (double)Math.Min(asked.Count, cached.Count) / Math.Max(1, Math.Max(asked.Count, cached.Count)),
            nouns,
            specific,
            unknown,
            kin,
            Math.Abs(diff.NovelAsked.Count - diff.NovelCached.Count),
            broader,
            ScopeWords.Where(asked.Words.Contains).Order().SequenceEqual(ScopeWords.Where(cached.Words.Contains).Order()) ? 0 : 1,
            Math.Min(Coverage(asked, diff.Gaps.SelectMany(g => g.Asked), senses), Coverage(cached, diff.Gaps.SelectMany(g => g.Cached), senses)),
            diff.Novel == 1 && AgentAdded(asked, cached, diff) ? 1 : 0,
            similarity * Math.Log(1 + novel),
        ];
    }

    /// <summary>
    /// The only new word is the doer that an active question names and its passive twin leaves out ("When are payslips
    /// emailed?" / "When does the company email payslips?"): the passive asks the same, whoever does it.
    /// </summary>
    static bool AgentAdded(QuestionWords asked, QuestionWords cached, QuestionDiff diff)
    {
        var (active, passive) = diff.NovelAsked.Count == 1 ? (asked, cached) : (cached, asked);
        return Auxiliary(active) is "do" or "does" or "did" && Auxiliary(passive) is "is" or "are" or "was" or "were";
    }

    static string? Auxiliary(QuestionWords q)
    {
        for (var i = 0; i < Math.Min(3, q.Count); i++)
            if (q.Words[i] is "do" or "does" or "did" or "is" or "are" or "was" or "were") return q.Words[i];
        return null;
    }

    /// <summary>Share of the question's content nouns that the other question says too (aligned or explained).</summary>
    static double Coverage(QuestionWords q, IEnumerable<int> novel, WordSenses senses)
    {
        var open = novel.ToHashSet();
        int nouns = 0, covered = 0;
        for (var k = 0; k < q.Count; k++)
        {
            if (q.Classes[k] != WordClass.Content || !senses.IsNoun(q.Lemmas[k][0])) continue;
            nouns++;
            if (!open.Contains(k)) covered++;
        }
        return nouns == 0 ? 1 : (double)covered / nouns;
    }

    static int Count(QuestionWords q, WordClass c)
    {
        var n = 0;
        foreach (var x in q.Classes) if (x == c) n++;
        return n;
    }
}
