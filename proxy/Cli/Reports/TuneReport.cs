using System.Globalization;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using RewriteProxy.Lanes;

namespace RewriteProxy.Cli.Reports;

/// <summary>What a tune run settled on, for the console and the config snippet.</summary>
public sealed record TuneRecommendation(double? MaxDrift, double? HitSimilarity, double? HitSimilarityWithoutGuard);

/// <summary>Every table, chart and file of one tune run; <see cref="Build"/> computes, <see cref="Write"/> writes.</summary>
public sealed class TuneReport
{
    public required string Lane { get; init; }
    public required LaneOptions LaneOptions { get; init; }
    public required TuneData Data { get; init; }
    public required double KeepGood { get; init; }
    public required double MaxFalseHits { get; init; }
    public required DateTimeOffset CreatedAt { get; init; }
    public IReadOnlyList<DropShareRow> DropShares { get; private init; } = [];
    public IReadOnlyList<DropScoreRow> DropScores { get; private init; } = [];
    public IReadOnlyList<HitRateRow> HitRates { get; private init; } = [];
    public DropScoreRow? BestF1 { get; private init; }
    public DropScoreRow? KeepsGood { get; private init; }
    public HitRateRow? HitWithGuard { get; private init; }
    public HitRateRow? HitWithoutGuard { get; private init; }
    public TuneRecommendation Recommendation { get; private init; } = new(null, null, null);

    public const string ReportFile = "report.md";
    public const string ConfigFile = "recommended-config.json";
    public const string DriftChart = "drift-histogram";
    public const string ScoresChart = "drop-scores";
    public const string SimilarityChart = "similarity-histogram";
    public const string DropShareTable = "drop-share";
    public const string DropScoreTable = "drop-scores-table";
    public const string HitRateTable = "hit-rates";

    public static TuneReport Build(string lane, LaneOptions laneOptions, TuneData data, double keepGood, double maxFalseHits,
        DateTimeOffset createdAt)
    {
        var shares = data.Drifts.Count > 0 ? TuneSweep.DropShares(data.Drifts, TuneSweep.DriftThresholds) : [];
        var scores = data.Source == TuneSource.DriftLabels ? TuneSweep.DropScores(data.Drifts, TuneSweep.DriftThresholds) : [];
        var hits = data.Source == TuneSource.PairLabels ? TuneSweep.HitRates(data.Pairs, TuneSweep.SimilarityThresholds) : [];
        var withGuard = TuneSweep.LowestHitSimilarity(hits, maxFalseHits, anchorGuard: true);
        var withoutGuard = TuneSweep.LowestHitSimilarity(hits, maxFalseHits, anchorGuard: false);
        return new TuneReport
        {
            Lane = lane, LaneOptions = laneOptions, Data = data, KeepGood = keepGood, MaxFalseHits = maxFalseHits, CreatedAt = createdAt,
            DropShares = shares, DropScores = scores, HitRates = hits,
            BestF1 = TuneSweep.BestF1(scores), KeepsGood = TuneSweep.KeepsGood(scores, keepGood),
            HitWithGuard = withGuard, HitWithoutGuard = withoutGuard,
            Recommendation = new TuneRecommendation(TuneSweep.RecommendMaxDrift(scores, keepGood), withGuard?.Threshold, withoutGuard?.Threshold),
        };
    }

    static string F(double v, string format = "0.000") => double.IsNaN(v) ? "—" : v.ToString(format, CultureInfo.InvariantCulture);
    static string T(double v) => v.ToString("0.00", CultureInfo.InvariantCulture);

    public string SourceLine => Data.Source switch
    {
        TuneSource.Events => $"{Data.Origin}, lane {Lane}" +
            (Data.First is { } a && Data.Last is { } b ? $", events from {a:yyyy-MM-dd HH:mm} to {b:yyyy-MM-dd HH:mm} UTC" : ", no events"),
        _ => Data.Origin,
    };

    /// <summary>The key figures as label/value rows, shown on the console and at the top of report.md.</summary>
    public ReportTable Summary()
    {
        var t = new ReportTable($"tune {Lane}", "figure", "value");
        t.Add("source", SourceLine);
        t.Add("configured MaxDrift", T(LaneOptions.MaxDrift));
        t.Add("configured HitSimilarity", T(LaneOptions.HitSimilarity));
        switch (Data.Source)
        {
            case TuneSource.Events:
                foreach (var g in Data.Drifts.GroupBy(d => d.Group).OrderBy(g => g.Key)) t.Add($"rewrites {g.Key}", g.Count().ToString(CultureInfo.InvariantCulture));
                foreach (var (reason, n) in Data.GuardRefusals.OrderBy(p => p.Key)) t.Add($"guard refusals ({reason})", n.ToString(CultureInfo.InvariantCulture));
                t.Add("recommendation", "none without labels; see the drop shares (--labels FILE.jsonl to measure)");
                break;
            case TuneSource.DriftLabels:
                t.Add("labelled rewrites", $"{Data.Drifts.Count(d => d.Group == TuneSweep.Good)} good, {Data.Drifts.Count(d => d.Group == TuneSweep.Bad)} bad");
                t.Add("best F1", BestF1 is { } b ? $"{F(b.F1)} at MaxDrift {T(b.Threshold)}" : "—");
                t.Add($"keeps ≥ {F(KeepGood, "0%")} good", KeepsGood is { } k ? $"MaxDrift {T(k.Threshold)} (keeps {F(k.GoodKept, "0.0%")})" : "no candidate does");
                t.Add("recommended MaxDrift", Recommendation.MaxDrift is { } m ? T(m) : "—");
                break;
            case TuneSource.PairLabels:
                t.Add("labelled pairs", $"{Data.Pairs.Count(p => p.Same)} same, {Data.Pairs.Count(p => !p.Same)} differ");
                t.Add("target false-hit rate", F(MaxFalseHits, "0.0%"));
                t.Add("HitSimilarity, anchor guard on", HitLine(HitWithGuard, true));
                t.Add("HitSimilarity, anchor guard off", HitLine(HitWithoutGuard, false));
                t.Add("recommended HitSimilarity", Recommendation.HitSimilarity is { } h ? T(h) : "—");
                break;
        }
        return t;
    }

    static string HitLine(HitRateRow? row, bool guard) => row is null
        ? "none on the grid meets the target"
        : $"{T(row.Threshold)} (false hits {F(row.FalseHitRate(guard), "0.0%")}, same pairs hit {F(row.SameHitRate(guard), "0.0%")})";

    public ReportTable DropShareTableOf()
    {
        var groups = Data.Drifts.Select(d => d.Group).Distinct().Order(StringComparer.Ordinal).ToList();
        var t = new ReportTable("Share of rewrites each MaxDrift would drop (drift > MaxDrift)",
            ["MaxDrift", "dropped", "share", .. groups.Select(g => $"of {g}")]);
        foreach (var r in DropShares)
            t.Add([T(r.Threshold), $"{r.Dropped}/{r.Total}", F(r.Share, "0.0%"),
                .. groups.Select(g => r.ByGroup.TryGetValue(g, out var c) ? $"{c.Dropped}/{c.Total}" : "—")]);
        return t;
    }

    public ReportTable DropScoreTableOf()
    {
        var t = new ReportTable("Dropping as a detector of bad rewrites (positive = bad rewrite dropped)",
            "MaxDrift", "TP", "FP", "FN", "precision", "recall", "F1", "good kept");
        foreach (var r in DropScores)
            t.Add(T(r.Threshold), $"{r.TruePositives}", $"{r.FalsePositives}", $"{r.FalseNegatives}",
                F(r.Precision), F(r.Recall), F(r.F1), F(r.GoodKept, "0.0%"));
        return t;
    }

    /// <summary>The hit-rate table; <paramref name="every"/> &gt; 1 thins it for the console, keeping the chosen rows.</summary>
    public ReportTable HitRateTableOf(int every = 1)
    {
        var t = new ReportTable($"Semantic hits of labelled pairs (hit = similarity ≥ HitSimilarity; {Data.Pairs.Count(p => !p.Same)} differ, {Data.Pairs.Count(p => p.Same)} same)",
            "HitSimilarity", "false hits, guard off", "same hit, guard off", "false hits, guard on", "same hit, guard on");
        for (var i = 0; i < HitRates.Count; i++)
        {
            var r = HitRates[i];
            if (i % every != 0 && r != HitWithGuard && r != HitWithoutGuard) continue;
            t.Add(T(r.Threshold), F(r.FalseHitRateOff, "0.0%"), F(r.SameHitRateOff, "0.0%"), F(r.FalseHitRateOn, "0.0%"), F(r.SameHitRateOn, "0.0%"));
        }
        return t;
    }

    /// <summary>The <c>Lanes:{name}</c> keys to paste into config/rewriteproxy.json; configured values where nothing was measured.</summary>
    public string ConfigSnippet()
    {
        var lane = new JsonObject
        {
            ["MaxDrift"] = Recommendation.MaxDrift ?? LaneOptions.MaxDrift,
            ["HitSimilarity"] = Recommendation.HitSimilarity ?? LaneOptions.HitSimilarity,
        };
        var root = new JsonObject { ["Lanes"] = new JsonObject { [Lane] = lane } };
        return root.ToJsonString(new JsonSerializerOptions { WriteIndented = true }) + "\n";
    }

    /// <summary>Writes charts, tables, the config snippet and report.md into <paramref name="directory"/>; returns the files written.</summary>
    public IReadOnlyList<string> Write(string directory)
    {
        Directory.CreateDirectory(directory);
        var files = new List<string>();
        var md = new StringBuilder();
        md.AppendLine($"# Tune report: lane `{Lane}`").AppendLine();
        md.AppendLine($"- Date: {CreatedAt.UtcDateTime:yyyy-MM-dd HH:mm:ss} UTC");
        md.AppendLine($"- Data: {SourceLine}");
        md.AppendLine($"- Counts: {Counts()}");
        md.AppendLine($"- Configured: MaxDrift {T(LaneOptions.MaxDrift)}, HitSimilarity {T(LaneOptions.HitSimilarity)} (kind {LaneOptions.Kind.ToString().ToLowerInvariant()})");
        md.AppendLine().AppendLine(Summary().ToMarkdown());

        if (Data.Drifts.Count > 0)
        {
            var byGroup = Data.Drifts.GroupBy(d => d.Group).OrderBy(g => g.Key, StringComparer.Ordinal)
                .ToDictionary(g => g.Key, g => (IReadOnlyList<double>)g.Select(d => d.Drift).ToList());
            var marks = new List<(double, string)> { (LaneOptions.MaxDrift, "configured MaxDrift") };
            if (Recommendation.MaxDrift is { } rec && rec != LaneOptions.MaxDrift) marks.Add((rec, "recommended MaxDrift"));
            TuneCharts.Histogram(Path.Combine(directory, DriftChart),
                $"Drift of {Lane} rewrites per {(Data.Source == TuneSource.Events ? "verdict" : "label")}", "drift (1 − cosine to the question)", byGroup, marks);
            files.AddRange([DriftChart + ".png", DriftChart + ".svg"]);
            md.AppendLine("## Drift distribution").AppendLine();
            md.AppendLine($"![drift histogram]({DriftChart}.png) ([SVG]({DriftChart}.svg))").AppendLine();

            var shares = DropShareTableOf();
            shares.WriteFiles(directory, DropShareTable);
            files.AddRange([DropShareTable + ".md", DropShareTable + ".csv"]);
            md.AppendLine("## What each MaxDrift would drop").AppendLine();
            md.AppendLine($"([Markdown]({DropShareTable}.md), [CSV]({DropShareTable}.csv))").AppendLine();
            md.AppendLine(shares.ToMarkdown());
        }
        if (DropScores.Count > 0)
        {
            var xs = DropScores.Select(r => r.Threshold).ToList();
            var marks = new List<(double, string)>();
            if (BestF1 is { } b) marks.Add((b.Threshold, "best F1"));
            if (KeepsGood is { } k) marks.Add((k.Threshold, $"keeps {F(KeepGood, "0%")} good"));
            TuneCharts.Lines(Path.Combine(directory, ScoresChart), $"Dropping bad {Lane} rewrites: precision, recall, F1", "MaxDrift", xs,
            [
                ("precision", DropScores.Select(r => r.Precision).ToList()),
                ("recall", DropScores.Select(r => r.Recall).ToList()),
                ("F1", DropScores.Select(r => r.F1).ToList()),
                ("good kept", DropScores.Select(r => r.GoodKept).ToList()),
            ], marks);
            files.AddRange([ScoresChart + ".png", ScoresChart + ".svg"]);
            var table = DropScoreTableOf();
            table.WriteFiles(directory, DropScoreTable);
            files.AddRange([DropScoreTable + ".md", DropScoreTable + ".csv"]);
            md.AppendLine("## Precision, recall and F1 of dropping").AppendLine();
            md.AppendLine($"![precision recall F1]({ScoresChart}.png) ([SVG]({ScoresChart}.svg))").AppendLine();
            md.AppendLine($"([Markdown]({DropScoreTable}.md), [CSV]({DropScoreTable}.csv))").AppendLine();
            md.AppendLine(table.ToMarkdown());
            md.AppendLine($"Recommended MaxDrift: the best-F1 threshold, raised to the smallest one that keeps ≥ {F(KeepGood, "0%")} of good rewrites when it drops more.").AppendLine();
        }
        if (HitRates.Count > 0)
        {
            var sims = new Dictionary<string, IReadOnlyList<double>>
            {
                ["same"] = Data.Pairs.Where(p => p.Same).Select(p => p.Similarity).ToList(),
                ["differ"] = Data.Pairs.Where(p => !p.Same).Select(p => p.Similarity).ToList(),
            };
            var marks = new List<(double, string)> { (LaneOptions.HitSimilarity, "configured HitSimilarity") };
            if (HitWithGuard is { } on) marks.Add((on.Threshold, "lowest, guard on"));
            if (HitWithoutGuard is { } off) marks.Add((off.Threshold, "lowest, guard off"));
            TuneCharts.Histogram(Path.Combine(directory, SimilarityChart), $"Similarity of labelled question pairs ({Lane})",
                "cosine similarity", sims, marks);
            files.AddRange([SimilarityChart + ".png", SimilarityChart + ".svg"]);
            var table = HitRateTableOf();
            table.WriteFiles(directory, HitRateTable);
            files.AddRange([HitRateTable + ".md", HitRateTable + ".csv"]);
            md.AppendLine("## Hit threshold").AppendLine();
            md.AppendLine($"![similarity histogram]({SimilarityChart}.png) ([SVG]({SimilarityChart}.svg))").AppendLine();
            md.AppendLine($"Lowest HitSimilarity whose false-hit rate (differ pairs that would hit) is at most {F(MaxFalseHits, "0.0%")}: " +
                $"guard on {HitLine(HitWithGuard, true)}; guard off {HitLine(HitWithoutGuard, false)}.").AppendLine();
            md.AppendLine($"Full table: [Markdown]({HitRateTable}.md), [CSV]({HitRateTable}.csv).").AppendLine();
        }
        File.WriteAllText(Path.Combine(directory, ConfigFile), ConfigSnippet());
        files.Add(ConfigFile);
        md.AppendLine("## Config snippet").AppendLine();
        md.AppendLine($"[{ConfigFile}]({ConfigFile}) (values not measured here are the configured ones):").AppendLine();
        md.AppendLine("```json").Append(ConfigSnippet()).AppendLine("```");
        File.WriteAllText(Path.Combine(directory, ReportFile), md.ToString());
        files.Add(ReportFile);
        return files;
    }

    string Counts() => Data.Source switch
    {
        TuneSource.Events => $"{Data.Drifts.Count} rewrite events, {Data.GuardRefusals.Values.Sum()} guard refusals",
        TuneSource.DriftLabels => $"{Data.Drifts.Count} labelled rewrites",
        _ => $"{Data.Pairs.Count} labelled pairs",
    };
}
