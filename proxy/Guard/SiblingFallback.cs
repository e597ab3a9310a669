namespace RewriteProxy.Guard;

/// <summary>
/// Never an empty expansion: when the drift guard keeps no sibling, the app receives the question itself, in the
/// completion's container, marked with <c>X-Rewrite-Fallback: question</c>, counted and not cached.
/// </summary>
/// <remarks>
/// Why the question and not the least-drifted candidate: when every candidate is dropped, the least-drifted one is
/// either an echo (the question again, in other words) or drifted past MaxDrift, and past MaxDrift most candidates
/// are off topic. Measured on the labelled list (docs/measurements/question-location.md): see
/// <c>SiblingFallbackTests.Least_drifted_dropped_sibling_is_mostly_off_topic</c>. The question retrieves what the
/// app would have retrieved without expansion: the safe floor.
/// </remarks>
public static class SiblingFallback
{
    /// <summary>The header value, as drafts use it for the same fallback.</summary>
    public const string HeaderValue = "question";

    /// <summary>True when an enforced judgement leaves the app with nothing.</summary>
    public static bool Needed(SiblingJudgement judgement) => judgement.Enforced && judgement.Kept.Count == 0;

    /// <summary>The answer in place of an empty one: <paramref name="question"/> in the completion's container.</summary>
    public static string Content(string question, SiblingContainer container) => container.RenderOnly(question.Trim());
}
