namespace RewriteProxy.Cache;

/// <summary>
/// Decides whether a semantic candidate (a stored question near the asked one) may be served for the asked
/// question. It reads what changed, not only how similar the two are: the anchor guard first (numbers, units,
/// negations, identifiers, WordNet antonyms), then the two questions aligned word by word, refusing when two parts
/// trade places (<see cref="AnchorReason.Role"/>) or when a word changed into one that WordNet does not give the same
/// sense (<see cref="AnchorReason.Substitution"/>). The one place <see cref="SemanticCache"/> asks. Thread-safe.
/// Rules and measurements: DEVELOPERS.md ("Hit decision").
/// </summary>
public sealed class HitDecision
{
    readonly AnchorGuard _guard;
    readonly WordSenses _senses;

    public HitDecision(AnchorGuard guard) : this(guard, WordSenses.Default) { }

    internal HitDecision(AnchorGuard guard, WordSenses senses)
    {
        _guard = guard;
        _senses = senses;
    }

    /// <summary>Reads one question once: a stored question's reading can be reused for every lookup that meets it.</summary>
    public HitQuestion Read(string question) => new(question, _guard.Extract(question), QuestionWords.Read(question, _senses));

    /// <summary>Serve or refuse <paramref name="cached"/> for <paramref name="asked"/>; a refusal names its reason (<see cref="AnchorReason"/>).</summary>
    public AnchorVerdict Decide(HitQuestion asked, HitQuestion cached, double similarity)
    {
        var anchors = _guard.Compare(asked.Anchors, cached.Anchors);
        if (!anchors.Agree) return anchors;
        var diff = QuestionDiff.Compare(asked.Words, cached.Words, _senses);
        if (diff.Swap is { } swap) return AnchorVerdict.Refused(AnchorReason.Role, swap);
        if (diff.Novel > 0)
            return AnchorVerdict.Refused(AnchorReason.Substitution,
                $"asked [{string.Join(", ", diff.NovelAsked)}], cached [{string.Join(", ", diff.NovelCached)}], substitutions {diff.Substitutions}");
        return anchors;
    }

    /// <summary>Reads both questions and decides: for tests and the measurement.</summary>
    public AnchorVerdict Decide(string asked, string cached, double similarity) => Decide(Read(asked), Read(cached), similarity);
}

/// <summary>What the decision reads from one question, once.</summary>
public sealed record HitQuestion(string Text, Anchors Anchors, QuestionWords Words);
