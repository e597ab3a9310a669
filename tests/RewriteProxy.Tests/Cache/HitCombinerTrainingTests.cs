using System.Globalization;
using RewriteProxy.Cache;
using RewriteProxy.Tests.Corpus;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// The training command of the learned hit combiner, and the check that the shipped file is what it makes. Dev part
/// only: the test part is never read here (tests/corpus/README.md). Run:
/// HIT_COMBINER_WRITE=1 dotnet test tests/RewriteProxy.Tests -c Release --filter "FullyQualifiedName~HitCombinerTrainingTests" --logger "console;verbosity=detailed"
/// (without HIT_COMBINER_WRITE it only prints the cross-validated figures).
/// </summary>
[Trait("Category", "Measure")]
public sealed class HitCombinerTrainingTests(ITestOutputHelper output)
{
    [Fact]
    public void Training_prints_cross_validated_figures_per_floor_and_family()
    {
        var dev = HitCombinerTraining.Pairs(CorpusPart.Dev);
        var (combiner, chosen, sweep) = HitCombinerTraining.Train(dev);
        int near = dev.Count(p => p.IsNearMiss), para = dev.Count(p => p.IsParaphrase);
        output.WriteLine($"dev: {near} near-misses, {para} paraphrases, {dev.Count(p => p.IsOther)} other-question pairs (similarity ≥ {HitCombinerTraining.PairFloor:F2}), "
            + $"{dev.Count(p => p.IsOther && p.Similarity >= HitCombinerTraining.OtherReference)} of them ≥ {HitCombinerTraining.OtherReference:F2}");
        output.WriteLine("");
        output.WriteLine("Leave-one-domain-out (10 folds), served out of fold at the threshold chosen on them:");
        output.WriteLine("");
        output.WriteLine("| floor | L2 | threshold | near-misses served | paraphrases served | other-question pairs served |");
        output.WriteLine("| --- | --- | --- | --- | --- | --- |");
        foreach (var cv in sweep)
            output.WriteLine($"| {cv.Floor:F2} | {cv.Lambda} | {cv.Threshold:F3} | {Served(cv, p => p.IsNearMiss, near)} | {Served(cv, p => p.IsParaphrase, para)} | "
                + $"{Served(cv, p => p.IsOther, dev.Count(p => p.IsOther && p.Similarity >= cv.Floor))} |");
        output.WriteLine("");
        output.WriteLine($"Chosen: floor {chosen.Floor:F2}, L2 {chosen.Lambda}, threshold {chosen.Threshold:F3}. Per family, out of fold:");
        output.WriteLine("");
        output.WriteLine("| label | family | n | hard rules refuse | below the floor | combiner serves |");
        output.WriteLine("| --- | --- | --- | --- | --- | --- |");
        foreach (var label in new[] { HitCorpus.NearMiss, HitCorpus.Paraphrase, HitCombinerTraining.OtherQuestion })
            foreach (var family in dev.Where(p => p.Label == label).GroupBy(p => p.Family).OrderBy(g => g.Key, StringComparer.Ordinal).Append(dev.Where(p => p.Label == label).GroupBy(_ => "**all**").Single()))
                output.WriteLine($"| {label} | {family.Key} | {family.Count()} | {family.Count(p => p.Refusal is not null)} | "
                    + $"{family.Count(p => p.Refusal is null && p.Similarity < chosen.Floor)} | {family.Count(chosen.Served)} |");
        output.WriteLine("");
        output.WriteLine("Other-question pairs served out of fold (derived, unlabelled by hand: read them):");
        foreach (var p in chosen.Candidates.Where(p => p.IsOther && chosen.Served(p)))
            output.WriteLine($"  {p.Similarity:F3} {chosen.OutOfFold[p]:F3}  {p.Cached}  /  {p.Asked}");
        output.WriteLine("");
        output.WriteLine("Weights of the shipped fit (standardised features):");
        foreach (var (name, mean, scale, weight) in combiner.Features) output.WriteLine($"  {name,-20} {weight,8:F3}   (mean {mean:F3}, scale {scale:F3})");
        output.WriteLine($"  bias {combiner.Bias:F3}");

        var trees = HitCombinerTraining.CrossValidate(dev, chosen.Floor, 1,
            (train, _) => BoostedTrees.Fit(train.Select(p => p.Features).ToList(), train.Select(p => p.IsParaphrase).ToList(),
                train.Select(p => p.IsOther ? HitCombinerTraining.OtherWeight : 1.0).ToList(), 100, 2, 0.1, 2, 1).Probability);
        output.WriteLine("");
        output.WriteLine($"Not shipped, for comparison at floor {chosen.Floor:F2}: gradient-boosted trees (100 trees of depth 2, rate 0.1), same folds and budgets: "
            + $"near-misses {Served(trees, p => p.IsNearMiss, near)}, paraphrases {Served(trees, p => p.IsParaphrase, para)}, other-question {Served(trees, p => p.IsOther, dev.Count(p => p.IsOther && p.Similarity >= chosen.Floor))}");

        if (Environment.GetEnvironmentVariable("HIT_COMBINER_WRITE") is { Length: > 0 })
        {
            File.WriteAllText(HitCombinerTraining.ShippedPath, combiner.Format(HitCombinerTraining.Header(chosen)));
            output.WriteLine($"wrote {Path.GetFullPath(HitCombinerTraining.ShippedPath)}");
        }
        Assert.True(chosen.Candidates.Count(p => p.IsNearMiss && chosen.Served(p)) <= HitCombinerTraining.NearMissBudget);
    }

    [Fact]
    public void Shipped_combiner_is_what_the_training_command_makes()
    {
        var (trained, _, _) = HitCombinerTraining.Train(HitCombinerTraining.Pairs(CorpusPart.Dev));
        using var file = File.OpenText(HitCombinerTraining.ShippedPath);
        var shipped = HitCombiner.Parse(file);
        const string rerun = "proxy/Cache/Resources/hit-combiner.tsv is not what training makes: run the command at its top";
        Assert.True(shipped.Floor == trained.Floor, $"{rerun} (floor {shipped.Floor} against {trained.Floor})");
        // The file holds 6 decimals, and the embeddings may differ in their last bits between CPUs.
        Close(shipped.Threshold, trained.Threshold, "threshold");
        Close(shipped.Bias, trained.Bias, "bias");
        for (var i = 0; i < HitFeatures.Names.Length; i++)
        {
            Close(shipped.Features[i].Mean, trained.Features[i].Mean, HitFeatures.Names[i] + " mean");
            Close(shipped.Features[i].Scale, trained.Features[i].Scale, HitFeatures.Names[i] + " scale");
            Close(shipped.Features[i].Weight, trained.Features[i].Weight, HitFeatures.Names[i] + " weight");
        }

        void Close(double a, double b, string what) =>
            Assert.True(Math.Abs(a - b) <= 1e-3 * Math.Max(1, Math.Abs(b)), $"{rerun} ({what}: shipped {a.ToString(CultureInfo.InvariantCulture)}, trained {b.ToString(CultureInfo.InvariantCulture)})");
    }

    static string Served(CrossValidation cv, Func<TrainingPair, bool> which, int of)
    {
        var n = cv.Candidates.Count(p => which(p) && cv.Served(p));
        return $"{n}/{of} ({100.0 * n / Math.Max(1, of):F1}%)";
    }
}
