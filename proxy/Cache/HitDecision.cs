namespace RewriteProxy.Cache;

/// <summary>
/// Decides whether a semantic candidate (a stored question near the asked one) may be served for the asked
/// question. It reads what changed, not only how similar the two are. First the hard rules, each refusing with its own
/// reason: the anchor guard (numbers, units, negations, identifiers, WordNet antonyms), implicit negations, time frames
/// and comparators (<see cref="QuestionFrames"/>), obligation against permission (<see cref="AnchorReason.Obligation"/>) and
/// parts that trade places (<see cref="AnchorReason.Role"/>). What
/// they let through, the learned combiner (<see cref="HitCombiner"/>) decides from the similarity and what the word
/// alignment left unexplained (<see cref="HitFeatures"/>), refusing as <see cref="AnchorReason.Learned"/>. The one place
/// <see cref="SemanticCache"/> asks. Thread-safe. Rules and measurements: docs/measurements/precision.md.
/// </summary>
public sealed class HitDecision
{
    readonly AnchorGuard _guard;
    readonly WordSenses _senses;
    readonly HitCombiner _combiner;

    /// <summary>A decision over the embedded WordNet tables and combiner, loaded here once per process, so that no lookup waits for them.</summary>
    public HitDecision(AnchorGuard guard) : this(guard, WordSenses.Default, HitCombiner.Default) { }

    internal HitDecision(AnchorGuard guard, WordSenses senses) : this(guard, senses, HitCombiner.Default) { }

    internal HitDecision(AnchorGuard guard, WordSenses senses, HitCombiner combiner)
    {
        _guard = guard;
        _senses = senses;
        _combiner = combiner;
    }

    /// <summary>Reads one question once: a stored question's reading can be reused for every lookup that meets it.</summary>
    public HitQuestion Read(string question)
    {
        var words = QuestionWords.Read(question, _senses);
        return new(question, _guard.Extract(question), words, QuestionFrames.Read(words));
    }

    /// <summary>Serve or refuse <paramref name="cached"/> for <paramref name="asked"/>; a refusal names its reason (<see cref="AnchorReason"/>).</summary>
    /// <param name="asked">The question asked now, read once for the lookup.</param>
    /// <param name="cached">The stored question of the candidate.</param>
    /// <param name="similarity">The candidate's similarity (at least the lane's HitSimilarity): one of the combiner's signals.
    /// Below the combiner's floor nothing is served, since it was not trained there.</param>
    public AnchorVerdict Decide(HitQuestion asked, HitQuestion cached, double similarity)
    {
        var (refusal, features, diff) = Examine(asked, cached, similarity);
        if (refusal is { } hard) return hard;
        var p = _combiner.Probability(features);
        if (similarity >= _combiner.Floor && p >= _combiner.Threshold) return AnchorVerdict.Agreed;
        return AnchorVerdict.Refused(AnchorReason.Learned,
            $"score {p:F3} (serves from {_combiner.Threshold:F3}), similarity {similarity:F3} (floor {_combiner.Floor:F2}); "
            + $"unexplained: asked [{string.Join(", ", diff!.NovelAsked)}], cached [{string.Join(", ", diff.NovelCached)}]");
    }

    /// <summary>The hard rules' refusal, if any; else the combiner's signals for the pair and what the alignment found.</summary>
    internal (AnchorVerdict? Refusal, double[] Features, QuestionDiff? Diff) Examine(HitQuestion asked, HitQuestion cached, double similarity)
    {
        var anchors = _guard.Compare(asked.Anchors, cached.Anchors);
        if (!anchors.Agree) return (anchors, [], null);
        if (QuestionFrames.Compare(asked.Frames, cached.Frames) is { } frames) return (frames, [], null);
        if (Obliges(asked.Words) != Obliges(cached.Words))
            return (AnchorVerdict.Refused(AnchorReason.Obligation, $"obligation: asked {Obliges(asked.Words)}, cached {Obliges(cached.Words)}"), [], null);
        var diff = QuestionDiff.Compare(asked.Words, cached.Words, _senses);
        if (diff.Swap is { } swap) return (AnchorVerdict.Refused(AnchorReason.Role, swap), [], diff);
        return (null, HitFeatures.Of(asked, cached, diff, similarity, _senses), diff);
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
public sealed record HitQuestion(string Text, Anchors Anchors, QuestionWords Words, QuestionFrames Frames);
