using System.Text.RegularExpressions;
using RewriteProxy.Guard;

namespace RewriteProxy.Lanes;

/// <summary>The two kinds of rewrite call.</summary>
public enum LaneKind { Draft, Siblings }

/// <summary>One named kind of rewrite call and its thresholds (<c>Lanes:{name}</c>).</summary>
public sealed record LaneOptions : IDriftLimits
{
    double? _maxDrift;

    public required string Name { get; init; }

    /// <summary>Required: <c>draft</c> (a hypothetical answer) or <c>siblings</c> (related questions, one per line).</summary>
    public required LaneKind Kind { get; init; }

    /// <summary>
    /// Least cosine similarity of two questions for a semantic candidate; the hit decision then serves or refuses it. Default
    /// 0.55, the floor the learned combiner was trained and cross-validated at (Cache/Resources/hit-combiner.tsv,
    /// docs/measurements/precision.md): restructured paraphrases score well below 0.85, and the decision, not the cosine,
    /// tells them from near-misses. Below the combiner's floor nothing is served; above it, a higher value serves fewer
    /// paraphrases.
    /// </summary>
    public double HitSimilarity { get; init; } = 0.55;

    /// <summary>
    /// Largest drift (1 − cosine to the question) a rewrite may have. Default per kind, measured on the labelled list
    /// (<see cref="DriftDefaults"/>): <see cref="DriftDefaults.DraftMaxDrift"/> for drafts,
    /// <see cref="DriftDefaults.SiblingMaxDrift"/> for siblings.
    /// </summary>
    public double MaxDrift
    {
        get => _maxDrift ?? (Kind == LaneKind.Draft ? DriftDefaults.DraftMaxDrift : DriftDefaults.SiblingMaxDrift);
        init => _maxDrift = value;
    }

    /// <summary>Siblings closer than this (cosine distance) to the question or to each other are echoes or duplicates. Default <see cref="DriftDefaults.MinSpread"/>.</summary>
    public double MinSpread { get; init; } = DriftDefaults.MinSpread;

    /// <summary>Most siblings kept (siblings lanes). Default 5, the number of related questions rewrite prompts usually ask for.</summary>
    public int MaxSiblings { get; init; } = 5;

    /// <summary>
    /// Most candidate lines of one completion that are embedded and judged; later lines are ignored. Bounds the cost
    /// of a runaway completion (thousands of lines). Default 20: four times the five questions a prompt usually asks for.
    /// </summary>
    public int MaxCandidates { get; init; } = 20;

    /// <summary>
    /// What a drifted draft becomes (draft lanes). Default <c>retry</c>: a second draft is usually on topic, and after
    /// <see cref="Retries"/> the question stands in, so the call is still answered.
    /// </summary>
    public OnDrift OnDrift { get; init; } = OnDrift.Retry;

    /// <summary>Upstream calls after the first when <see cref="OnDrift"/> is <c>retry</c>. Default 1: a miss costs at most two upstream calls.</summary>
    public int Retries { get; init; } = 1;

    /// <summary><c>enforce</c> drops drifted rewrites; <c>observe</c> only measures and reports. Default <c>enforce</c>, the guard's purpose; observe is for rolling a lane out.</summary>
    public GuardMode Mode { get; init; } = GuardMode.Enforce;

    /// <summary>Optional .NET regex with a named group <c>q</c> that picks the question out of a templated user message. Default none: the whole message is the question.</summary>
    public Regex? QuestionPattern { get; init; }

    /// <summary>
    /// Which lines of a siblings completion count as candidates. Default <c>questions</c>: siblings prompts ask for
    /// questions, and the statements around them are preambles and closing remarks.
    /// </summary>
    public CandidateRule Candidates { get; init; } = CandidateRule.Questions;
}
