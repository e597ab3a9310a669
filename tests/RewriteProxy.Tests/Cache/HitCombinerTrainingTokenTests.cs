using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;
using RewriteProxy.Tests.Corpus;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// Whether the model's own per-word states (<see cref="TokenStates"/>, BERTScore-style signals in
/// <see cref="HitFeatures.TokenNames"/>) let the combiner serve more dev paraphrases at the same precision: the shipped
/// features with and without them, through the whole training procedure (<see cref="HitCombinerTraining.Choose"/>: floors,
/// penalties, leave-one-domain-out folds, 0 near-misses and ≤ 2 other-question pairs out of fold). Dev part only.
/// Run: HIT_TOKENS=1 dotnet test tests/RewriteProxy.Tests -c Release --filter "FullyQualifiedName~HitCombinerTrainingTokenTests" --logger "console;verbosity=detailed"
/// </summary>
[Trait("Category", "Measure")]
public sealed class HitCombinerTrainingTokenTests(ITestOutputHelper output)
{
    static readonly double[] MatchFloors = [0.5, 0.6, 0.7];

    static readonly double[] ExplainFloors = [0.5, 0.6, 0.7, 0.8];

    readonly List<string> _binding = [];

    [Fact]
    public void Token_state_signals_cross_validated_against_the_shipped_features()
    {
        // A second model load and every dev question's states (about a minute on two shared cores): opt in, it is a decision record.
        if (Environment.GetEnvironmentVariable("HIT_TOKENS") != "1")
        {
            output.WriteLine("set HIT_TOKENS=1 to run the measurement");
            return;
        }
        var dev = HitCombinerTraining.Pairs(CorpusPart.Dev);
        var decision = new HitDecision(new AnchorGuard());
        var questions = dev.Where(p => p.Refusal is null).SelectMany(p => new[] { p.Cached, p.Asked }).Distinct(StringComparer.Ordinal).ToList();
        var states = new Dictionary<string, TokenStates>(StringComparer.Ordinal);
        var read = questions.ToDictionary(q => q, decision.Read, StringComparer.Ordinal);
        using (var model = OnnxEmbedder.Load(new EmbeddingOptions()))
            foreach (var batch in questions.Chunk(32))
            {
                var s = model.EmbedTokens(batch);
                for (var i = 0; i < batch.Length; i++) states[batch[i]] = s[i];
            }
        var diffs = dev.Where(p => p.Refusal is null).ToDictionary(p => p, p => decision.Examine(read[p.Asked], read[p.Cached], p.Similarity).Diff!);
        // BERTScore's idf: -log of the share of questions holding the word, over every distinct dev question (unlabelled text;
        // the paper takes it from the reference sentences), +1 smoothing for a word none holds.
        var documents = dev.SelectMany(p => new[] { p.Cached, p.Asked }).Distinct(StringComparer.Ordinal).ToList();
        var holding = documents.SelectMany(d => decision.Read(d).Words.Words.Distinct()).CountBy(w => w).ToDictionary(StringComparer.Ordinal);
        double Idf(string word) => Math.Log((documents.Count + 1.0) / (holding.GetValueOrDefault(word) + 1.0));
        double[] Tokens(TrainingPair p, double floor, bool idf = false) => p.Refusal is null
            ? HitFeatures.OfTokens(read[p.Asked], read[p.Cached], diffs[p], states[p.Asked], states[p.Cached], floor, idf ? Idf : null)
            : new double[HitFeatures.TokenNames.Length];

        Distributions(dev, p => Tokens(p, HitFeatures.MatchFloor));
        Cost(questions);

        var sets = new List<(string Name, double Floor, int[] Columns, bool Idf)> { ("shipped features", HitFeatures.MatchFloor, [], false) };
        sets.Add(("+ BERTScore F1, min(P, R), content-word F1", HitFeatures.MatchFloor, [0, 1, 2], false));
        sets.Add(("+ the same, idf-weighted", HitFeatures.MatchFloor, [0, 1, 2], true));
        foreach (var floor in MatchFloors)
        {
            sets.Add(($"+ unexplained words' best match (mean, min, count < {floor})", floor, [3, 4, 5], false));
            sets.Add(($"+ all six (count < {floor})", floor, [0, 1, 2, 3, 4, 5], false));
        }
        var explainedBy = ExplainFloors.Select(floor => ($"shipped features, a word with a counterpart in context ≥ {floor} explained", floor)).ToList();
        var results = new List<(string Name, IReadOnlyList<TrainingPair> Pairs, CrossValidation Chosen)>();
        output.WriteLine("| features | floor | L2 | threshold | near-misses served | paraphrases served | other-question pairs served | paraphrases, other-question budget alone | paraphrases, near-miss budget alone | paraphrases, other-question budget 4 |");
        output.WriteLine("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |");
        foreach (var (name, floor, columns, idf) in sets)
            Row(name, dev.Select(p => p with { Features = [.. p.Features, .. columns.Select(c => Tokens(p, floor, idf)[c])] }).ToList());

        void Row(string name, List<TrainingPair> pairs)
        {
            var (chosen, sweep) = HitCombinerTraining.Choose(pairs);
            results.Add((name, pairs, chosen));
            int Served(Func<TrainingPair, bool> which) => chosen.Candidates.Count(p => which(p) && chosen.Served(p));
            _binding.Add($"{name} (best over floors: {sweep.Max(cv => cv.Candidates.Count(p => p.IsParaphrase && cv.Served(p)))}): top near-misses "
                + string.Join("; ", chosen.Candidates.Where(p => p.IsNearMiss).OrderByDescending(p => chosen.OutOfFold[p]).Take(2).Select(p => $"{chosen.OutOfFold[p]:F3} {p.Family} {p.Cached} / {p.Asked}"))
                + " | top other: " + string.Join("; ", chosen.Candidates.Where(p => p.IsOther).OrderByDescending(p => chosen.OutOfFold[p]).Take(4).Select(p => $"{chosen.OutOfFold[p]:F3} {p.Cached} / {p.Asked}")));
            output.WriteLine($"| {name} | {chosen.Floor:F2} | {chosen.Lambda} | {chosen.Threshold:F3} | {Served(p => p.IsNearMiss)}/{pairs.Count(p => p.IsNearMiss)} | "
                + $"{Served(p => p.IsParaphrase)}/{pairs.Count(p => p.IsParaphrase)} | {Served(p => p.IsOther)}/{pairs.Count(p => p.IsOther && p.Similarity >= chosen.Floor)} | "
                + $"{Alone(chosen, p => p.IsOther, HitCombinerTraining.OtherBudget)} | {Alone(chosen, p => p.IsNearMiss, HitCombinerTraining.NearMissBudget)} | "
                + $"{Loose(chosen)} |");
        }
        foreach (var (name, floor) in explainedBy)
        {
            var pairs = dev.Select(p => p.Refusal is null
                ? p with
                {
                    Features = HitFeatures.Of(read[p.Asked], read[p.Cached],
                        HitFeatures.Explain(read[p.Asked], read[p.Cached], diffs[p], states[p.Asked], states[p.Cached], floor), p.Similarity, WordSenses.Default),
                }
                : p).ToList();
            Row(name, pairs);
        }
        var (allName, allPairs, allChosen) = results[sets.FindIndex(s => s.Name == "+ all six (count < 0.6)")];
        var trees = HitCombinerTraining.CrossValidate(allPairs, allChosen.Floor, 1,
            (train, _) => BoostedTrees.Fit(train.Select(p => p.Features).ToList(), train.Select(p => p.IsParaphrase).ToList(),
                train.Select(p => p.IsOther ? HitCombinerTraining.OtherWeight : 1.0).ToList(), 100, 2, 0.1, 2, 1).Probability);
        output.WriteLine($"| {allName}, gradient-boosted trees (100 of depth 2, rate 0.1) | {allChosen.Floor:F2} | – | {trees.Threshold:F3} | "
            + $"{trees.Candidates.Count(p => p.IsNearMiss && trees.Served(p))}/{allPairs.Count(p => p.IsNearMiss)} | {trees.Candidates.Count(p => p.IsParaphrase && trees.Served(p))}/{allPairs.Count(p => p.IsParaphrase)} | "
            + $"{trees.Candidates.Count(p => p.IsOther && trees.Served(p))}/{allPairs.Count(p => p.IsOther && p.Similarity >= allChosen.Floor)} |");
        output.WriteLine("");
        foreach (var line in _binding) output.WriteLine(line);
        output.WriteLine("");
        output.WriteLine("Paraphrases served out of fold, per family (columns in the order of the table above):");
        output.WriteLine("");
        output.WriteLine($"| family | n | {string.Join(" | ", results.Select((_, i) => i == 0 ? "shipped" : $"set {i}"))} |");
        output.WriteLine($"| --- | --- | {string.Join(" | ", results.Select(_ => "---"))} |");
        foreach (var family in dev.Where(p => p.IsParaphrase).GroupBy(p => p.Family).OrderBy(g => g.Key, StringComparer.Ordinal))
            output.WriteLine($"| {family.Key} | {family.Count()} | {string.Join(" | ", results.Select(r => r.Chosen.Candidates.Count(p => p.IsParaphrase && p.Family == family.Key && r.Chosen.Served(p))))} |");
        foreach (var (name, _, chosen) in results.Skip(1))
        {
            output.WriteLine("");
            output.WriteLine($"{name}: other-question pairs served out of fold, and paraphrases served that the shipped features do not serve:");
            foreach (var p in chosen.Candidates.Where(p => p.IsOther && chosen.Served(p)))
                output.WriteLine($"  other {p.Similarity:F3}  {p.Cached}  /  {p.Asked}");
            var before = results[0].Chosen;
            foreach (var p in chosen.Candidates.Where(p => p.IsParaphrase && chosen.Served(p) && !before.Candidates.Any(b => b.Id == p.Id && before.Served(b))))
                output.WriteLine($"  + {p.Family} {p.Similarity:F3}  {p.Cached}  /  {p.Asked}");
            foreach (var b in before.Candidates.Where(b => b.IsParaphrase && before.Served(b) && !chosen.Candidates.Any(p => p.Id == b.Id && chosen.Served(p))))
                output.WriteLine($"  - {b.Family} {b.Similarity:F3}  {b.Cached}  /  {b.Asked}");
        }
    }

    /// <summary>
    /// What recomputing a cached question's states per candidate would cost: one model run for one question, as a lookup would
    /// make it, against the sentence vector alone (the same run, pooled); and what keeping them would take. Stopwatch medians
    /// over the dev questions, on whatever load the machine has (write `uptime` beside them).
    /// </summary>
    void Cost(IReadOnlyList<string> questions)
    {
        using var model = OnnxEmbedder.Load(new EmbeddingOptions());
        var sample = questions.Take(200).ToList();
        foreach (var q in sample.Take(20)) { model.Embed(q); model.EmbedTokens([q]); }
        double Median(Action<string> run)
        {
            var times = sample.Select(q => { var watch = System.Diagnostics.Stopwatch.StartNew(); run(q); return watch.Elapsed.TotalMilliseconds; }).Order().ToArray();
            return times[times.Length / 2];
        }
        var pooled = Median(q => model.Embed(q));
        var states = Median(q => model.EmbedTokens([q]));
        var words = sample.Select(q => model.EmbedTokens([q])[0].Vectors.Count(v => v is not null)).Average();
        var content = sample.Select(q => QuestionWords.Read(q, WordSenses.Default).Classes.Count(c => c == WordClass.Content)).Average();
        output.WriteLine($"Cost, {sample.Count} dev questions one at a time (median): sentence vector {pooled:F2} ms, per-word states {states:F2} ms; "
            + $"{words:F1} words with a state per question ({words * model.Dimension * sizeof(float) / 1024:F1} KiB as float32), "
            + $"{content:F1} content words ({content * model.Dimension / 1024.0:F1} KiB as int8)");
        output.WriteLine("");
    }

    /// <summary>Paraphrases served out of fold at the lowest threshold that keeps one budget alone: which of the two binds.</summary>
    static int Alone(CrossValidation cv, Func<TrainingPair, bool> budgeted, int budget)
    {
        var threshold = cv.OutOfFold.Values.Append(1.0).Distinct().Order().First(t => cv.Candidates.Count(p => budgeted(p) && cv.OutOfFold[p] >= t) <= budget);
        return cv.Candidates.Count(p => p.IsParaphrase && cv.OutOfFold[p] >= threshold);
    }

    /// <summary>
    /// Paraphrases served out of fold with twice the other-question budget (near-misses still 0): some derived other-question pairs
    /// that bind it are the same question in fact ("pause" / "freeze my membership"), so the budget of 2 is a little strict.
    /// </summary>
    static int Loose(CrossValidation cv)
    {
        var threshold = cv.OutOfFold.Values.Append(1.0).Distinct().Order().First(t =>
            cv.Candidates.Count(p => p.IsNearMiss && cv.OutOfFold[p] >= t) <= HitCombinerTraining.NearMissBudget
            && cv.Candidates.Count(p => p.IsOther && cv.OutOfFold[p] >= t) <= 2 * HitCombinerTraining.OtherBudget);
        return cv.Candidates.Count(p => p.IsParaphrase && cv.OutOfFold[p] >= threshold);
    }

    /// <summary>Quartiles of each token signal per label, among the pairs the hard rules let through at similarity ≥ 0.55.</summary>
    void Distributions(IReadOnlyList<TrainingPair> dev, Func<TrainingPair, double[]> tokens)
    {
        output.WriteLine("Token signals, quartiles (25% / 50% / 75%) among pairs the hard rules let through at similarity ≥ 0.55:");
        output.WriteLine("");
        output.WriteLine("| signal | paraphrases | near-misses | other-question pairs | register and restructure paraphrases | other-question pairs ≥ 0.70 |");
        output.WriteLine("| --- | --- | --- | --- | --- | --- |");
        var candidates = HitCombinerTraining.Candidates(dev, 0.55);
        var values = candidates.ToDictionary(p => p, tokens);
        for (var c = 0; c < HitFeatures.TokenNames.Length; c++)
        {
            string Quartiles(Func<TrainingPair, bool> which)
            {
                var sorted = candidates.Where(which).Select(p => values[p][c]).Order().ToArray();
                return sorted.Length == 0 ? "–" : $"{sorted[sorted.Length / 4]:F3} / {sorted[sorted.Length / 2]:F3} / {sorted[3 * sorted.Length / 4]:F3}";
            }
            output.WriteLine($"| {HitFeatures.TokenNames[c]} | {Quartiles(p => p.IsParaphrase)} | {Quartiles(p => p.IsNearMiss)} | {Quartiles(p => p.IsOther)} | "
                + $"{Quartiles(p => p.Family is "register" or "restructure")} | {Quartiles(p => p.IsOther && p.Similarity >= 0.70)} |");
        }
        output.WriteLine("");
    }
}
