using System.Numerics.Tensors;

namespace RewriteProxy.Guard;

/// <summary>What the guard made of one siblings completion.</summary>
/// <param name="Kept">Accepted siblings in the order they are returned (the order of selection).</param>
/// <param name="Dropped">Refused siblings: first those dropped for drift or echo, in completion order, then
/// duplicates and surplus, in the order selection reached them.</param>
/// <param name="Content">What the app receives: in enforce mode the kept texts joined by "\n" ("" when none
/// is kept); in observe mode the original completion, unchanged.</param>
/// <param name="Enforced">False in observe mode: <paramref name="Kept"/> and <paramref name="Dropped"/> are then
/// would-be verdicts and <paramref name="Content"/> is untouched.</param>
public sealed record SiblingJudgement(
    IReadOnlyList<JudgedRewrite> Kept,
    IReadOnlyList<JudgedRewrite> Dropped,
    string Content,
    bool Enforced)
{
    /// <summary>Largest drift among <see cref="Kept"/> (the <c>X-Rewrite-Drift</c> value); null when none is kept.</summary>
    public double? MaxKeptDrift => Kept.Count == 0 ? null : Kept.Max(k => k.Drift);
}

/// <summary>
/// Judges the siblings of one question: drops those that drift from it, echo it, or duplicate each other,
/// and keeps at most <see cref="IDriftLimits.MaxSiblings"/>, chosen by Maximal Marginal Relevance.
/// </summary>
/// <remarks>
/// drift = 1 − cos(question, sibling); spread = 1 − cos(sibling, sibling). A candidate is dropped as
/// <c>drift</c> when drift &gt; <see cref="IDriftLimits.MaxDrift"/>, as <c>echo</c> when drift &lt;
/// <see cref="IDriftLimits.MinSpread"/> (it repeats the question, so it adds nothing to retrieval). The rest are
/// picked one at a time by MMR (Carbonell &amp; Goldstein 1998):
/// score(c) = λ·cos(q, c) − (1 − λ)·max over kept k of cos(c, k), the second term 0 while nothing is kept; ties go
/// to the earlier line. Only candidates within <see cref="RelevanceFloor"/> compete this way; the others follow them,
/// most relevant first, so a far line never displaces a near one for being different. A pick whose spread to a kept sibling is below MinSpread is dropped as <c>duplicate</c>;
/// a pick after MaxSiblings are kept is dropped as <c>surplus</c>.
/// </remarks>
public static class SiblingGuard
{
    /// <summary>
    /// λ of MMR = 0.7, leaning to relevance. Drift filtering leaves off-topic survivors that are, by nature, the
    /// most novel candidates, so weighing novelty lifts them past the MaxSiblings cut. Measured on the labelled
    /// list with MaxSiblings 3 (docs/measurements/drift-defaults.md): off-topic siblings kept in 45 slots were 6 at λ 0.3, 3 at 0.5,
    /// 2 at 0.7–0.9 and 1 at 1.0, while mean spread between kept siblings was 0.580, 0.549, 0.511, 0.505 and
    /// 0.492. 0.7 is the most diverse λ at the 2-off-topic level. Carbonell &amp; Goldstein used λ values of 0.3
    /// and 0.7 in their experiments (from memory).
    /// </summary>
    public const double Relevance = 0.7;

    /// <summary>
    /// Relevance floor of MMR, as a drift: diversity is weighed only among candidates that drift at most this much from
    /// the question. A candidate above it (but within MaxDrift) is kept only after every candidate below it, in order of
    /// relevance, so MMR never keeps a far, "diverse" line in place of a near one. 0.45: on the dev part of the labelled
    /// sibling sets (tests/corpus/siblings) floors from 0.30 to 0.45 gave the fewest sets with an off-topic line kept while an
    /// on-topic one was dropped (7 of 80, against 9 with MMR over every candidate); the highest of them keeps the most
    /// diversity (docs/measurements/drift-defaults.md).
    /// </summary>
    public const double RelevanceFloor = 0.45;

    /// <summary>Judges <paramref name="candidates"/> (from <see cref="SiblingParser"/>) against the question.</summary>
    /// <param name="question">L2-normalised question vector.</param>
    /// <param name="candidates">Candidate texts in completion order.</param>
    /// <param name="vectors">L2-normalised vectors of <paramref name="candidates"/>, same order and count.</param>
    /// <param name="completion">The completion as upstream wrote it; the content in observe mode.</param>
    /// <param name="lane">Thresholds and mode of the siblings lane.</param>
    public static SiblingJudgement Judge(
        float[] question,
        IReadOnlyList<string> candidates,
        IReadOnlyList<float[]> vectors,
        string completion,
        IDriftLimits lane) => Judge(question, candidates, vectors, completion, lane, Relevance, RelevanceFloor);

    /// <summary>
    /// As the public overload, with λ and the relevance floor given (a floor at or above MaxDrift turns it off): for the
    /// measurements that chose <see cref="Relevance"/> and <see cref="RelevanceFloor"/>. <paramref name="consensus"/> weighs a
    /// candidate's mean cosine to the other candidates beside its cosine to the question when ranking (the centroid idea of
    /// relevance feedback, Rocchio 1971): measured on the dev sibling sets and not shipped (0), see docs/measurements/precision.md.
    /// </summary>
    internal static SiblingJudgement Judge(
        float[] question,
        IReadOnlyList<string> candidates,
        IReadOnlyList<float[]> vectors,
        string completion,
        IDriftLimits lane,
        double relevance,
        double floor,
        double consensus = 0)
    {
        if (candidates.Count != vectors.Count)
            throw new ArgumentException($"{candidates.Count} candidates but {vectors.Count} vectors.", nameof(vectors));

        var dropped = new List<JudgedRewrite>();
        var pool = new List<int>();
        var drift = new double[candidates.Count];
        for (var i = 0; i < candidates.Count; i++)
        {
            drift[i] = 1 - Cosine(question, vectors[i]);
            if (drift[i] > lane.MaxDrift) dropped.Add(new(candidates[i], drift[i], false, DropReason.Drift));
            else if (drift[i] < lane.MinSpread) dropped.Add(new(candidates[i], drift[i], false, DropReason.Echo));
            else pool.Add(i);
        }

        // How near each candidate is to the question, and (weighted by consensus) to the other candidates on average.
        var near = new double[candidates.Count];
        foreach (var i in pool)
        {
            // Not computed when unused (the shipped 0): n² cosines on every judged completion.
            var agreement = consensus == 0 || pool.Count < 2 ? 0 : pool.Where(j => j != i).Average(j => Cosine(vectors[i], vectors[j]));
            near[i] = (1 - consensus) * (1 - drift[i]) + consensus * agreement;
        }

        var kept = new List<int>();
        var keptVerdicts = new List<JudgedRewrite>();
        // Largest cosine of each pooled candidate to anything kept so far; updated after each keep.
        var nearestKept = new double[candidates.Count];
        Array.Fill(nearestKept, double.NegativeInfinity);
        while (pool.Count > 0)
        {
            var best = -1;
            var bestScore = double.NegativeInfinity;
            // Candidates within the floor first, by MMR; only when none is left, the rest by relevance alone.
            var withinFloor = pool.Any(i => drift[i] <= floor);
            foreach (var i in pool)
            {
                if (withinFloor && drift[i] > floor) continue;
                var redundancy = kept.Count == 0 || !withinFloor ? 0 : nearestKept[i];
                var score = withinFloor ? relevance * near[i] - (1 - relevance) * redundancy : near[i];
                if (score > bestScore) { bestScore = score; best = i; }
            }
            pool.Remove(best);

            if (kept.Count > 0 && 1 - nearestKept[best] < lane.MinSpread)
                dropped.Add(new(candidates[best], drift[best], false, DropReason.Duplicate));
            else if (kept.Count >= lane.MaxSiblings)
                dropped.Add(new(candidates[best], drift[best], false, DropReason.Surplus));
            else
            {
                kept.Add(best);
                keptVerdicts.Add(new(candidates[best], drift[best], true, null));
                foreach (var i in pool)
                    nearestKept[i] = Math.Max(nearestKept[i], Cosine(vectors[i], vectors[best]));
            }
        }

        var enforced = lane.Mode == GuardMode.Enforce;
        var content = enforced ? string.Join("\n", keptVerdicts.Select(k => k.Text)) : completion;
        return new SiblingJudgement(keptVerdicts, dropped, content, enforced);
    }

    /// <summary>Cosine of two L2-normalised vectors, i.e. their dot product.</summary>
    internal static double Cosine(float[] a, float[] b) => TensorPrimitives.Dot<float>(a, b);
}
