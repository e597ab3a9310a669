namespace RewriteProxy.Cache;

/// <summary>
/// Decides whether a semantic candidate (a stored question near the asked one) may be served for the asked
/// question. Today: the anchor guard. The one place <see cref="SemanticCache"/> asks, so that the rules behind it
/// can change without touching the lookup.
/// </summary>
public sealed class HitDecision
{
    readonly AnchorGuard _guard;

    public HitDecision(AnchorGuard guard) => _guard = guard;

    /// <summary>Reads one question once: a stored question's reading can be reused for every lookup that meets it.</summary>
    public HitQuestion Read(string question) => new(question, _guard.Extract(question));

    /// <summary>Serve or refuse <paramref name="cached"/> for <paramref name="asked"/>; a refusal names its reason (<see cref="AnchorReason"/>).</summary>
    public AnchorVerdict Decide(HitQuestion asked, HitQuestion cached, double similarity) =>
        _guard.Compare(asked.Anchors, cached.Anchors);

    /// <summary>Reads both questions and decides: for tests and the measurement.</summary>
    public AnchorVerdict Decide(string asked, string cached, double similarity) => Decide(Read(asked), Read(cached), similarity);
}

/// <summary>What the decision reads from one question, once.</summary>
public sealed record HitQuestion(string Text, Anchors Anchors);
