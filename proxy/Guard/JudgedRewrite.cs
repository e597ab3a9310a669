namespace RewriteProxy.Guard;

/// <summary>What the drift guard decided about one rewrite (a sibling line or a whole draft).</summary>
/// <param name="Text">The rewrite as it would be returned to the app.</param>
/// <param name="Drift">1 − cosine(question, rewrite).</param>
/// <param name="Accepted">True when the rewrite is kept.</param>
/// <param name="Reason">Why it was dropped; null when accepted.</param>
public sealed record JudgedRewrite(string Text, double Drift, bool Accepted, DropReason? Reason);
