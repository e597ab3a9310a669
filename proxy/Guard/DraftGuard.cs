
namespace RewriteProxy.Guard;

/// <summary>What the HTTP path does with a draft after the guard has judged it.</summary>
public enum DraftDecision
{
    /// <summary>Return the draft (it is within MaxDrift, or the lane only observes).</summary>
    Accept,
    /// <summary>Call upstream again for a new draft.</summary>
    Retry,
    /// <summary>Return the question itself in place of the draft, so retrieval degrades to the plain question.</summary>
    Fallback,
    /// <summary>Refuse the call (the lane's <c>OnDrift</c> is <c>reject</c>).</summary>
    Reject,
}

/// <summary>Judges a draft (a hypothetical answer) by its drift from the question, and decides what follows.</summary>
public static class DraftGuard
{
    /// <summary>Drift of the whole draft; accepted when drift ≤ <see cref="IDriftLimits.MaxDrift"/>, else reason <c>drift</c>.</summary>
    /// <param name="question">L2-normalised question vector.</param>
    /// <param name="draft">L2-normalised vector of the whole draft.</param>
    /// <param name="draftText">The draft as it would be returned.</param>
    /// <param name="lane">The draft lane.</param>
    /// <remarks>In observe mode the verdict is still the would-be one; <see cref="Decide"/> accepts regardless.</remarks>
    public static JudgedRewrite Judge(float[] question, float[] draft, string draftText, IDriftLimits lane)
    {
        var drift = 1 - SiblingGuard.Cosine(question, draft);
        return drift <= lane.MaxDrift
            ? new JudgedRewrite(draftText, drift, true, null)
            : new JudgedRewrite(draftText, drift, false, DropReason.Drift);
    }

    /// <summary>What to do with a judged draft.</summary>
    /// <param name="verdict">From <see cref="Judge"/>.</param>
    /// <param name="attempt">Upstream calls made for this question so far, the one that gave
    /// <paramref name="verdict"/> included (1 after the first call).</param>
    /// <param name="lane">The draft lane.</param>
    /// <returns>
    /// <see cref="DraftDecision.Accept"/> when accepted or in observe mode. Otherwise by <see cref="IDriftLimits.OnDrift"/>:
    /// <c>retry</c> gives Retry while attempt ≤ <see cref="IDriftLimits.Retries"/> (so Retries = 1 means one
    /// call after the first), then Fallback, because a question still answers retrieval when its draft
    /// cannot; <c>fallback</c> gives Fallback; <c>reject</c> gives Reject.
    /// </returns>
    public static DraftDecision Decide(JudgedRewrite verdict, int attempt, IDriftLimits lane)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(attempt, 1);
        if (verdict.Accepted || lane.Mode == GuardMode.Observe) return DraftDecision.Accept;
        return lane.OnDrift switch
        {
            OnDrift.Retry => attempt <= lane.Retries ? DraftDecision.Retry : DraftDecision.Fallback,
            OnDrift.Fallback => DraftDecision.Fallback,
            OnDrift.Reject => DraftDecision.Reject,
            _ => throw new ArgumentOutOfRangeException(nameof(lane), lane.OnDrift, "Unknown OnDrift."),
        };
    }
}
