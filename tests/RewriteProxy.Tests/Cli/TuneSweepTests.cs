using RewriteProxy.Lanes;
using RewriteProxy.Cli;
using RewriteProxy.Cli.Reports;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Cli;

public class TuneSweepTests
{
    static readonly LaneOptions Siblings = new() { Name = "siblings", Kind = LaneKind.Siblings, MaxDrift = 0.65, HitSimilarity = 0.85 };

    /// <summary>Three good and three bad rewrites of an invented bike-share handbook lane; drifts chosen to sit on and between grid values.</summary>
    static readonly DriftSample[] Labelled =
    [
        new("good", 0.20), new("good", 0.40), new("good", 0.62),
        new("bad", 0.58), new("bad", 0.70), new("bad", 0.90),
    ];

    static DropScoreRow At(IReadOnlyList<DropScoreRow> rows, double t) => rows.Single(r => Math.Abs(r.Threshold - t) < 1e-9);

    [Fact]
    public void Precision_recall_and_F1_of_dropping_equal_a_hand_count()
    {
        var rows = TuneSweep.DropScores(Labelled, TuneSweep.DriftThresholds);

        // Worked by hand (a rewrite is dropped when drift > MaxDrift; positive = bad and dropped):
        // MaxDrift 0.50: dropped 0.58(bad) 0.62(good) 0.70(bad) 0.90(bad) -> TP 3, FP 1, FN 0, TN 2
        //   precision 3/4 = 0.75, recall 3/3 = 1, F1 = 2*0.75*1 / 1.75 = 6/7, good kept 2/3
        var r50 = At(rows, 0.50);
        Assert.Equal((3, 1, 0, 2), (r50.TruePositives, r50.FalsePositives, r50.FalseNegatives, r50.TrueNegatives));
        Assert.Equal(0.75, r50.Precision, 12);
        Assert.Equal(1.0, r50.Recall, 12);
        Assert.Equal(6.0 / 7.0, r50.F1, 12);
        Assert.Equal(2.0 / 3.0, r50.GoodKept, 12);
        // MaxDrift 0.60: dropped 0.62(good) 0.70 0.90 -> TP 2, FP 1, FN 1 (0.58): precision 2/3, recall 2/3, F1 = 4/6
        var r60 = At(rows, 0.60);
        Assert.Equal(2.0 / 3.0, r60.Precision, 12);
        Assert.Equal(2.0 / 3.0, r60.Recall, 12);
        Assert.Equal(4.0 / 6.0, r60.F1, 12);
        // MaxDrift 0.65: dropped 0.70 0.90 -> TP 2, FP 0, FN 1: precision 1, recall 2/3, F1 = 2*1*(2/3) / (5/3) = 0.8
        var r65 = At(rows, 0.65);
        Assert.Equal(1.0, r65.Precision, 12);
        Assert.Equal(0.8, r65.F1, 12);
        // MaxDrift 0.70: 0.70 itself is not above it, so only 0.90 is dropped -> TP 1, FN 2: recall 1/3, F1 = 2/4
        Assert.Equal(1.0 / 3.0, At(rows, 0.70).Recall, 12);
        Assert.Equal(0.5, At(rows, 0.70).F1, 12);
        // MaxDrift 0.95: nothing dropped -> precision does not exist, F1 = 0 / (0 + 0 + 3) = 0
        Assert.True(double.IsNaN(At(rows, 0.95).Precision));
        Assert.Equal(0.0, At(rows, 0.95).F1, 12);
    }

    [Fact]
    public void Recommended_MaxDrift_is_the_best_F1_raised_to_keep_95_percent_of_good_rewrites()
    {
        var rows = TuneSweep.DropScores(Labelled, TuneSweep.DriftThresholds);

        // By hand: F1 is 6/7 at 0.40, 0.45, 0.50, 0.55 (same drops) and lower elsewhere; the tie goes to the highest, 0.55.
        Assert.Equal(0.55, TuneSweep.BestF1(rows)!.Threshold, 9);
        // Keeping >= 95% of 3 good rewrites means keeping all 3, so MaxDrift >= 0.62: the smallest grid value is 0.65.
        Assert.Equal(0.65, TuneSweep.KeepsGood(rows, 0.95)!.Threshold, 9);
        Assert.Equal(0.65, TuneSweep.RecommendMaxDrift(rows, 0.95)!.Value, 9);
        // With a looser keep share (2/3 kept is enough) the best-F1 threshold stands.
        Assert.Equal(0.55, TuneSweep.RecommendMaxDrift(rows, 0.6)!.Value, 9);
    }

    [Fact]
    public void Drop_share_table_matches_a_hand_count()
    {
        DriftSample[] events = [new("accepted", 0.10), new("accepted", 0.33), new("accepted", 0.50), new("dropped", 0.70), new("dropped", 0.96)];
        var data = new TuneData(TuneSource.Events, "event log", events, [], new Dictionary<string, int>(), null, null);
        var report = TuneReport.Build("siblings", Siblings, data, 0.95, 0.01, DateTimeOffset.UnixEpoch);
        var csv = report.DropShareTableOf().ToCsv().Split("\r\n", StringSplitOptions.RemoveEmptyEntries);

        Assert.Equal("MaxDrift,dropped,share,of accepted,of dropped", csv[0]);
        Assert.Equal(1 + 14, csv.Length); // 0.30 … 0.95 in steps of 0.05 is 14 thresholds
        // By hand: above 0.30 are 0.33 0.50 0.70 0.96 (4 of 5); above 0.50 only 0.70 0.96 (0.50 is not above itself);
        // above 0.70 only 0.96; above 0.95 only 0.96.
        Assert.Equal("0.30,4/5,80.0%,2/3,2/2", csv[1]);
        Assert.Equal("0.50,2/5,40.0%,0/3,2/2", csv[5]);
        Assert.Equal("0.70,1/5,20.0%,0/3,1/2", csv[9]);
        Assert.Equal("0.95,1/5,20.0%,0/3,1/2", csv[14]);
    }

    [Fact]
    public void Lowest_hit_similarity_meets_the_false_hit_target_with_and_without_the_anchor_guard()
    {
        PairSample[] pairs =
        [
            new(true, 0.95, true), new(true, 0.88, true), new(true, 0.80, true),
            new(false, 0.93, false), new(false, 0.86, true), new(false, 0.60, true),
        ];
        var rows = TuneSweep.HitRates(pairs, TuneSweep.SimilarityThresholds);

        // By hand, target 0 false hits (a hit is similarity >= threshold):
        // guard off: the differ pair at 0.93 hits up to 0.93, so the lowest clean threshold is 0.94; only 0.95 of the same pairs hits: 1/3.
        var off = TuneSweep.LowestHitSimilarity(rows, 0.0, anchorGuard: false)!;
        Assert.Equal(0.94, off.Threshold, 9);
        Assert.Equal(1.0 / 3.0, off.SameHitRateOff, 12);
        // guard on: 0.93 is refused by its anchors, 0.86 is not, so the lowest is 0.87; same pairs 0.95 and 0.88 hit: 2/3.
        var on = TuneSweep.LowestHitSimilarity(rows, 0.0, anchorGuard: true)!;
        Assert.Equal(0.87, on.Threshold, 9);
        Assert.Equal(2.0 / 3.0, on.SameHitRateOn, 12);
        // A target of 1/3 tolerates one of three differ pairs: guard off, 0.87 lets only 0.93 through.
        Assert.Equal(0.87, TuneSweep.LowestHitSimilarity(rows, 1.0 / 3.0, anchorGuard: false)!.Threshold, 9);
    }

    [Fact]
    public void Csv_quotes_fields_as_RFC_4180_asks()
    {
        // RFC 4180 section 2: fields with commas or double quotes are enclosed in quotes, inner quotes doubled; lines end in CRLF.
        var table = new ReportTable("t", "a", "b").Add("x,y", "say \"hi\"");
        Assert.Equal("a,b\r\n\"x,y\",\"say \"\"hi\"\"\"\r\n", table.ToCsv());
    }

    [Fact]
    public void Candidate_grids_hold_the_values_as_written()
    {
        Assert.Equal([0.30, 0.35, 0.40, 0.45, 0.50, 0.55, 0.60, 0.65, 0.70, 0.75, 0.80, 0.85, 0.90, 0.95], TuneSweep.DriftThresholds);
        Assert.Equal(50, TuneSweep.SimilarityThresholds.Count);
        Assert.Equal(0.87, TuneSweep.SimilarityThresholds[37]);
    }
}
