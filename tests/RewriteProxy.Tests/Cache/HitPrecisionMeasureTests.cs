using RewriteProxy.Cache;
using RewriteProxy.Lanes;
using RewriteProxy.Tests.Corpus;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// The hit corpus (tests/corpus/hit-pairs) through the real embedder and the real hit decision at the shipped defaults:
/// per part (dev, test) and per family, how many near-misses are served (false hits), how many paraphrases are served,
/// and how many other-question pairs (two questions of one app from different rows, derived as HitCombinerTraining does)
/// are served. README ("Choosing thresholds") quotes the tables this writes.
/// Run: dotnet test tests/RewriteProxy.Tests -c Release --filter "FullyQualifiedName~HitPrecisionMeasureTests" --logger "console;verbosity=detailed"
/// HIT_PARTS=dev reads the dev part only (while tuning: the test part is read once, when the decision is final).
/// HIT_DUMP=/path/file.tsv also writes every dev pair with its similarity and verdicts (never the test part: it is not
/// read pair by pair, so that nothing is tuned on it; HIT_DUMP_TEST_AFTER_FREEZE=path writes it only to explain final figures).
/// </summary>
[Trait("Category", "Measure")]
public sealed class HitPrecisionMeasureTests(ITestOutputHelper output)
{
    static readonly double[] Sweep = [0.55, 0.60, 0.65, 0.70, 0.75, 0.80, 0.85, 0.90];

    static double Shipped => new LaneOptions { Name = "measure", Kind = LaneKind.Draft }.HitSimilarity;

    static string[] Parts => Environment.GetEnvironmentVariable("HIT_PARTS") == "dev" ? ["dev"] : HitCorpusMeasure.Parts;

    [Fact]
    public void Report_near_misses_and_paraphrases_served_per_part_and_family()
    {
        var measured = HitCorpusMeasure.Measure(parts: Parts);
        Assert.NotEmpty(measured);
        var at = Shipped;
        if (Environment.GetEnvironmentVariable("HIT_DUMP") is { Length: > 0 } dump)
            HitCorpusMeasure.Dump(measured.Where(m => m.Pair.Part == "dev"), dump);
        // Only to explain the final figures, once nothing will change any more (tests/corpus/README.md).
        if (Environment.GetEnvironmentVariable("HIT_DUMP_TEST_AFTER_FREEZE") is { Length: > 0 } testDump)
            HitCorpusMeasure.Dump(measured.Where(m => m.Pair.Part == "test"), testDump);

        foreach (var part in Parts)
        {
            var rows = measured.Where(m => m.Pair.Part == part).ToList();
            var others = Others(part);
            output.WriteLine($"## {part}: {rows.Count} pairs and {others.Count} other-question pairs (similarity ≥ {HitCombinerTraining.PairFloor:F2}), HitSimilarity {at:F2}");
            output.WriteLine("");
            output.WriteLine("| label | family | n | cosine alone | anchor guard alone | hit decision |");
            output.WriteLine("| --- | --- | --- | --- | --- | --- |");
            foreach (var label in new[] { HitCorpus.NearMiss, HitCorpus.Paraphrase })
            {
                foreach (var family in rows.Where(m => m.Pair.Label == label).GroupBy(m => m.Pair.Family).OrderBy(g => g.Key, StringComparer.Ordinal))
                    output.WriteLine(Row(label, family.Key, family.ToList(), at));
                output.WriteLine(Row(label, "**all**", rows.Where(m => m.Pair.Label == label).ToList(), at));
            }
            output.WriteLine($"| other question | (derived) | {others.Count} | {others.Count(o => o.Similarity >= at)} | {others.Count(o => o.Similarity >= at && o.Guard.Agree)} | "
                + $"{others.Count(o => o.Similarity >= at && o.Decision.Agree)} |");
            output.WriteLine("");
            output.WriteLine("| HitSimilarity | near-misses served, anchor guard alone | paraphrases served, anchor guard alone | near-misses served, decision | paraphrases served, decision | other-question pairs served, decision |");
            output.WriteLine("| --- | --- | --- | --- | --- | --- |");
            var near = rows.Where(m => !m.Pair.IsParaphrase).ToList();
            var para = rows.Where(m => m.Pair.IsParaphrase).ToList();
            foreach (var t in Sweep)
                output.WriteLine($"| {t:F2} | {Share(near.Count(m => m.ServedToday(t)), near.Count)} | {Share(para.Count(m => m.ServedToday(t)), para.Count)} | "
                    + $"{Share(near.Count(m => m.ServedByDecision(t)), near.Count)} | {Share(para.Count(m => m.ServedByDecision(t)), para.Count)} | "
                    + $"{others.Count(o => o.Similarity >= t && o.Decision.Agree)}/{others.Count(o => o.Similarity >= t)} |");
            output.WriteLine("");
            output.WriteLine("Refusals of the hit decision at the default, by reason: " + string.Join(", ",
                rows.Where(m => m.ServedByCosine(at) && !m.Decision.Agree).GroupBy(m => HitCorpusMeasure.Label(m.Decision))
                    .OrderByDescending(g => g.Count()).Select(g => $"{g.Key} {g.Count()}")));
            output.WriteLine("Served other-question pairs (derived, unlabelled by hand):");
            foreach (var o in others.Where(o => o.Similarity >= at && o.Decision.Agree))
                output.WriteLine($"  {o.Similarity:F3}  {o.Cached}  /  {o.Asked}");
            output.WriteLine("");
        }
    }

    sealed record OtherPair(string Cached, string Asked, double Similarity, AnchorVerdict Guard, AnchorVerdict Decision);

    static List<OtherPair> Others(string part)
    {
        var guard = new AnchorGuard();
        var decision = new HitDecision(guard);
        return HitCombinerTraining.Pairs(part == "dev" ? CorpusPart.Dev : CorpusPart.Test).Where(p => p.IsOther)
            .Select(p => new OtherPair(p.Cached, p.Asked, p.Similarity, guard.Compare(p.Asked, p.Cached), decision.Decide(p.Asked, p.Cached, p.Similarity)))
            .ToList();
    }

    /// <summary>
    /// What the decision measured at the default HitSimilarity (docs/measurements/precision.md): dev (tuned on) and test
    /// (read once, when the decision was final). A change that serves more near-misses or other-question pairs, or fewer
    /// paraphrases, fails here.
    /// </summary>
    static readonly Dictionary<string, (int MaxNearMisses, int MinParaphrases, int MaxOthers)> Measured = new()
    {
        ["dev"] = (0, 202, 2),
        // Read once at 77ea6862 (2026-12-02 07:56 UTC), held out: the decision did not change after it.
        ["test"] = (3, 90, 1),
    };

    [Fact]
    public void Decision_serves_no_more_near_misses_and_no_fewer_paraphrases_than_measured()
    {
        var at = Shipped;
        foreach (var (part, (maxNear, minPara, maxOthers)) in Measured.Where(m => Parts.Contains(m.Key)))
        {
            var rows = HitCorpusMeasure.Measure(parts: [part]);
            var near = rows.Count(m => !m.Pair.IsParaphrase && m.ServedByDecision(at));
            var para = rows.Count(m => m.Pair.IsParaphrase && m.ServedByDecision(at));
            var others = Others(part).Count(o => o.Similarity >= at && o.Decision.Agree);
            Assert.True(near <= maxNear, $"{part}: {near} near-misses served, measured {maxNear}");
            Assert.True(para >= minPara, $"{part}: {para} paraphrases served, measured {minPara}");
            Assert.True(others <= maxOthers, $"{part}: {others} other-question pairs served, measured {maxOthers}");
        }
    }

    /// <summary>The HitSimilarity default is the floor the shipped combiner was trained at: below it the combiner serves nothing.</summary>
    [Fact]
    public void Default_hit_similarity_is_the_combiners_floor() => Assert.Equal(HitCombiner.Default.Floor, Shipped);

    static string Row(string label, string family, List<MeasuredPair> rows, double at) =>
        $"| {label} | {family} | {rows.Count} | {rows.Count(m => m.ServedByCosine(at))} | {rows.Count(m => m.ServedToday(at))} | {rows.Count(m => m.ServedByDecision(at))} |";

    static string Share(int count, int of) => of == 0 ? "–" : $"{count}/{of} ({100.0 * count / of:F1}%)";
}

/// <summary>
/// The choices behind the decision's word senses, measured on the dev part only (the test part is never read here):
/// how many WordNet senses of a word count, and whether a direct hypernym counts as the same sense.
/// </summary>
[Trait("Category", "Measure")]
public sealed class HitDecisionTuningTests(ITestOutputHelper output)
{
    [Fact]
    public void Sense_depth_and_hypernyms_on_the_dev_part()
    {
        var guard = new RewriteProxy.Cache.AnchorGuard();
        var at = new LaneOptions { Name = "measure", Kind = LaneKind.Draft }.HitSimilarity;
        output.WriteLine($"dev part, HitSimilarity {at:F2}, the shipped combiner (trained at the default depth): near-misses served / paraphrases served");
        output.WriteLine("| senses per part of speech | for the other word | hypernyms | near-misses served | paraphrases served |");
        output.WriteLine("| --- | --- | --- | --- | --- |");
        foreach (var (depth, other) in new[] { (1, 1), (2, 2), (3, 3), (4, 4), (6, 6), (99, 99), (1, 99), (2, 6), (2, 99), (3, 6), (3, 99) })
            foreach (var hypernyms in new[] { false, true })
            {
                var decision = new RewriteProxy.Cache.HitDecision(guard, RewriteProxy.Cache.WordSenses.Default.With(depth, hypernyms, other));
                var dev = HitCorpusMeasure.Measure(decision, ["dev"]);
                var near = dev.Where(m => !m.Pair.IsParaphrase).ToList();
                var para = dev.Where(m => m.Pair.IsParaphrase).ToList();
                output.WriteLine($"| {(depth == 99 ? "all" : depth)} | {(other == 99 ? "all" : other)} | {(hypernyms ? "yes" : "no")} | {near.Count(m => m.ServedByDecision(at))}/{near.Count} | {para.Count(m => m.ServedByDecision(at))}/{para.Count} |");
            }
    }
}
