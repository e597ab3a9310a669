namespace RewriteProxy.Cli;

/// <summary>One rewrite's drift and its group: the verdict from the event log (accepted | dropped) or a label (good | bad).</summary>
public sealed record DriftSample(string Group, double Drift);

/// <summary>One labelled question pair: would a semantic hit between them be right (same) or wrong (differ)?</summary>
public sealed record PairSample(bool Same, double Similarity, bool AnchorsAgree);

/// <summary>What one MaxDrift would drop: in total and per group.</summary>
public sealed record DropShareRow(double Threshold, int Total, int Dropped, IReadOnlyDictionary<string, (int Dropped, int Total)> ByGroup)
{
    public double Share => Total == 0 ? double.NaN : (double)Dropped / Total;
}

/// <summary>
/// "Drop" as a classifier of bad rewrites at one MaxDrift (positive = a bad rewrite that is dropped).
/// Precision is NaN when nothing is dropped, recall NaN when nothing is bad.
/// </summary>
public sealed record DropScoreRow(double Threshold, int TruePositives, int FalsePositives, int FalseNegatives, int TrueNegatives)
{
    public double Precision => TruePositives + FalsePositives == 0 ? double.NaN : (double)TruePositives / (TruePositives + FalsePositives);
    public double Recall => TruePositives + FalseNegatives == 0 ? double.NaN : (double)TruePositives / (TruePositives + FalseNegatives);
    /// <summary>2TP / (2TP + FP + FN): the harmonic mean of precision and recall, defined even when one of them is not.</summary>
    public double F1 => 2 * TruePositives + FalsePositives + FalseNegatives == 0
        ? double.NaN
        : 2.0 * TruePositives / (2 * TruePositives + FalsePositives + FalseNegatives);
    /// <summary>Share of good rewrites this MaxDrift keeps.</summary>
    public double GoodKept => TrueNegatives + FalsePositives == 0 ? double.NaN : (double)TrueNegatives / (TrueNegatives + FalsePositives);
}

/// <summary>Semantic hits at one HitSimilarity, with the anchor guard off and on.</summary>
public sealed record HitRateRow(double Threshold, int Same, int Differ, int SameHitsOff, int FalseHitsOff, int SameHitsOn, int FalseHitsOn)
{
    public double FalseHitRateOff => Differ == 0 ? double.NaN : (double)FalseHitsOff / Differ;
    public double FalseHitRateOn => Differ == 0 ? double.NaN : (double)FalseHitsOn / Differ;
    public double SameHitRateOff => Same == 0 ? double.NaN : (double)SameHitsOff / Same;
    public double SameHitRateOn => Same == 0 ? double.NaN : (double)SameHitsOn / Same;
    public double FalseHitRate(bool guard) => guard ? FalseHitRateOn : FalseHitRateOff;
    public double SameHitRate(bool guard) => guard ? SameHitRateOn : SameHitRateOff;
}

/// <summary>
/// The arithmetic of <c>tune</c>, apart from reading data and drawing: what each candidate threshold would do.
/// A rewrite is dropped when its drift is above MaxDrift (as the drift guards do); two questions hit when their
/// similarity is at least HitSimilarity (as the vector index searches).
/// </summary>
public static class TuneSweep
{
    /// <summary>Candidate MaxDrift values: 0.30 … 0.95 in steps of 0.05, the range where the measured defaults sit (Guard/DriftDefaults).</summary>
    public static readonly IReadOnlyList<double> DriftThresholds = Grid(0.30, 0.95, 0.05);

    /// <summary>Candidate HitSimilarity values: 0.50 … 0.99 in steps of 0.01; a hit below 0.50 is not a paraphrase for a sentence model.</summary>
    public static readonly IReadOnlyList<double> SimilarityThresholds = Grid(0.50, 0.99, 0.01);

    /// <summary>Share of good rewrites a recommended MaxDrift must keep by default: dropping more than 1 in 20 good rewrites costs recall of retrieval (common practice for a 95% level).</summary>
    public const double DefaultKeepGood = 0.95;

    /// <summary>Default target false-hit rate: 1 wrong answer in 100 semantic hits of unrelated pairs.</summary>
    public const double DefaultMaxFalseHits = 0.01;

    public const string Good = "good";
    public const string Bad = "bad";

    /// <summary>Values from <paramref name="from"/> to <paramref name="to"/> inclusive, rounded so that 0.30 + 0.05·k prints and compares as written.</summary>
    public static IReadOnlyList<double> Grid(double from, double to, double step)
    {
        var values = new List<double>();
        var decimals = Math.Max(0, (int)Math.Ceiling(-Math.Log10(step)) + 1);
        for (var i = 0; ; i++)
        {
            var v = Math.Round(from + i * step, decimals);
            if (v > to + step / 2) break;
            values.Add(v);
        }
        return values;
    }

    public static IReadOnlyList<DropShareRow> DropShares(IReadOnlyList<DriftSample> samples, IReadOnlyList<double> thresholds)
    {
        // Sorted once, each threshold is a binary search: a million events take milliseconds, not a pass per threshold.
        var groups = samples.GroupBy(s => s.Group).OrderBy(g => g.Key, StringComparer.Ordinal)
            .Select(g => (g.Key, Drifts: g.Select(s => s.Drift).Order().ToArray())).ToList();
        return thresholds.Select(t =>
        {
            var byGroup = groups.ToDictionary(g => g.Key, g => (Dropped: g.Drifts.Length - CountAtMost(g.Drifts, t), Total: g.Drifts.Length));
            return new DropShareRow(t, samples.Count, byGroup.Values.Sum(v => v.Dropped), byGroup);
        }).ToList();
    }

    /// <summary>How many of the sorted values are ≤ <paramref name="t"/> (are kept at MaxDrift t).</summary>
    static int CountAtMost(double[] sorted, double t)
    {
        int lo = 0, hi = sorted.Length;
        while (lo < hi)
        {
            var mid = (lo + hi) >>> 1;
            if (sorted[mid] <= t) lo = mid + 1;
            else hi = mid;
        }
        return lo;
    }

    /// <summary>Scores of "drop" against good/bad labels; samples of any other group are not counted.</summary>
    public static IReadOnlyList<DropScoreRow> DropScores(IReadOnlyList<DriftSample> samples, IReadOnlyList<double> thresholds) =>
        thresholds.Select(t =>
        {
            int tp = 0, fp = 0, fn = 0, tn = 0;
            foreach (var s in samples)
            {
                var dropped = s.Drift > t;
                if (s.Group == Bad) { if (dropped) tp++; else fn++; }
                else if (s.Group == Good) { if (dropped) fp++; else tn++; }
            }
            return new DropScoreRow(t, tp, fp, fn, tn);
        }).ToList();

    /// <summary>The row of highest F1; on a tie the higher threshold, which drops fewer good rewrites.</summary>
    public static DropScoreRow? BestF1(IReadOnlyList<DropScoreRow> rows) =>
        rows.Where(r => !double.IsNaN(r.F1)).OrderByDescending(r => r.F1).ThenByDescending(r => r.Threshold).FirstOrDefault();

    /// <summary>The smallest threshold whose share of good rewrites kept is at least <paramref name="keepGood"/>.</summary>
    public static DropScoreRow? KeepsGood(IReadOnlyList<DropScoreRow> rows, double keepGood) =>
        rows.Where(r => !double.IsNaN(r.GoodKept) && r.GoodKept >= keepGood).OrderBy(r => r.Threshold).FirstOrDefault();

    /// <summary>
    /// The MaxDrift to recommend: the best-F1 threshold, raised to the keep-good one when it would drop more good
    /// rewrites than allowed (a drifted rewrite costs a little retrieval noise; a dropped good one costs recall).
    /// </summary>
    public static double? RecommendMaxDrift(IReadOnlyList<DropScoreRow> rows, double keepGood)
    {
        var best = BestF1(rows);
        var keep = KeepsGood(rows, keepGood);
        if (best is null) return keep?.Threshold;
        return keep is null ? best.Threshold : Math.Max(best.Threshold, keep.Threshold);
    }

    public static IReadOnlyList<HitRateRow> HitRates(IReadOnlyList<PairSample> pairs, IReadOnlyList<double> thresholds)
    {
        var same = pairs.Count(p => p.Same);
        var differ = pairs.Count - same;
        return thresholds.Select(t =>
        {
            var hits = pairs.Where(p => p.Similarity >= t).ToList();
            return new HitRateRow(t, same, differ,
                SameHitsOff: hits.Count(p => p.Same), FalseHitsOff: hits.Count(p => !p.Same),
                SameHitsOn: hits.Count(p => p.Same && p.AnchorsAgree), FalseHitsOn: hits.Count(p => !p.Same && p.AnchorsAgree));
        }).ToList();
    }

    /// <summary>The lowest threshold whose false-hit rate is at most <paramref name="maxFalseHits"/>; null when none on the grid is.</summary>
    public static HitRateRow? LowestHitSimilarity(IReadOnlyList<HitRateRow> rows, double maxFalseHits, bool anchorGuard) =>
        rows.Where(r => !double.IsNaN(r.FalseHitRate(anchorGuard)) && r.FalseHitRate(anchorGuard) <= maxFalseHits)
            .OrderBy(r => r.Threshold).FirstOrDefault();
}
