namespace RewriteProxy.Cache;

/// <summary>
/// Decides whether a semantic candidate (a stored question near the asked one) may be served for the asked
/// question. It reads what changed, not only how similar the two are: the anchor guard first (numbers, units,
/// negations, identifiers, WordNet antonyms), then the two questions aligned word by word, refusing when two parts
/// trade places (<see cref="AnchorReason.Role"/>) or when a word changed into one that WordNet does not give the same
/// sense (<see cref="AnchorReason.Substitution"/>). The one place <see cref="SemanticCache"/> asks. Thread-safe.
/// Rules and measurements: docs/measurements/precision.md.
/// </summary>
public sealed class HitDecision
{
    readonly AnchorGuard _guard;
    readonly WordSenses _senses;

    /// <summary>A decision over the embedded WordNet tables, loaded here once per process, so that no lookup waits for them.</summary>
    public HitDecision(AnchorGuard guard) : this(guard, WordSenses.Default) { }

    internal HitDecision(AnchorGuard guard, WordSenses senses)
    {
        _guard = guard;
        _senses = senses;
    }

    /// <summary>Reads one question once: a stored question's reading can be reused for every lookup that meets it.</summary>
    public HitQuestion Read(string question) => new(question, _guard.Extract(question), QuestionWords.Read(question, _senses));

    /// <summary>Serve or refuse <paramref name="cached"/> for <paramref name="asked"/>; a refusal names its reason (<see cref="AnchorReason"/>).</summary>
    /// <param name="asked">The question asked now, read once for the lookup.</param>
    /// <param name="cached">The stored question of the candidate.</param>
    /// <param name="similarity">The candidate's similarity, already at least the lane's HitSimilarity. The rules do not read it
    /// today; it is part of the call so that a decision weighing it (a learned combiner, not built yet) needs no new call site.</param>
    public AnchorVerdict Decide(HitQuestion asked, HitQuestion cached, double similarity)
    {
        var anchors = _guard.Compare(asked.Anchors, cached.Anchors);
        if (!anchors.Agree) return anchors;
        if (Obliges(asked.Words) != Obliges(cached.Words))
            return AnchorVerdict.Refused(AnchorReason.Substitution, $"obligation: asked {Obliges(asked.Words)}, cached {Obliges(cached.Words)}");
        var diff = QuestionDiff.Compare(asked.Words, cached.Words, _senses);
        if (diff.Swap is { } swap) return AnchorVerdict.Refused(AnchorReason.Role, swap);
        if (diff.Novel == 1 && AgentAdded(asked.Words, cached.Words, diff) is not null)
            return AnchorVerdict.Agreed;
        if (diff.Novel > 0)
            return AnchorVerdict.Refused(AnchorReason.Substitution,
                $"asked [{string.Join(", ", diff.NovelAsked)}], cached [{string.Join(", ", diff.NovelCached)}], substitutions {diff.Substitutions}");
        return anchors;
    }

    /// <summary>
    /// The only new word is the doer that an active question names and its passive twin leaves out ("When are payslips
    /// emailed?" / "When does the company email payslips?"): the passive asks the same, whoever does it.
    /// </summary>
    static string? AgentAdded(QuestionWords asked, QuestionWords cached, QuestionDiff diff)
    {
        var (active, passive, word) = diff.NovelAsked.Count == 1 ? (asked, cached, diff.NovelAsked[0]) : (cached, asked, diff.NovelCached[0]);
        return Auxiliary(active) is "do" or "does" or "did" && Auxiliary(passive) is "is" or "are" or "was" or "were" ? word : null;
    }

    static string? Auxiliary(QuestionWords q)
    {
        for (var i = 0; i < Math.Min(3, q.Count); i++)
            if (q.Words[i] is "do" or "does" or "did" or "is" or "are" or "was" or "were") return q.Words[i];
        return null;
    }

    /// <summary>"Must I", "do I need to", "is … required", "do I have to": whether the question asks about an obligation.
    /// Permission ("can I", "is it allowed") is the other kind, which rewordings trade freely among themselves.</summary>
    static bool Obliges(QuestionWords q)
    {
        for (var i = 0; i < q.Count; i++)
        {
            var w = q.Words[i];
            if (HitLexicon.Obligation.Contains(w)) return true;
            if (w is "have" or "has" or "had" or "having" && i + 1 < q.Count && q.Words[i + 1] == "to") return true;
        }
        return false;
    }

    /// <summary>Reads both questions and decides: for tests and the measurement.</summary>
    public AnchorVerdict Decide(string asked, string cached, double similarity) => Decide(Read(asked), Read(cached), similarity);
}

/// <summary>What the decision reads from one question, once.</summary>
public sealed record HitQuestion(string Text, Anchors Anchors, QuestionWords Words);
