namespace RewriteProxy.Guard;

/// <summary>Why the drift guard dropped a rewrite; the <c>reason</c> label of <c>rewriteproxy_dropped_total</c>.</summary>
public enum DropReason
{
    /// <summary>Further from the question than the lane's MaxDrift.</summary>
    Drift,
    /// <summary>Within MinSpread of the question: it repeats the question and adds nothing to retrieval.</summary>
    Echo,
    /// <summary>Within MinSpread of a sibling already kept.</summary>
    Duplicate,
    /// <summary>A good sibling past MaxSiblings.</summary>
    Surplus,
}
