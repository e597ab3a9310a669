using RewriteProxy.Lanes;
using RewriteProxy.Guard;
using RewriteProxy.Hosting;
using RewriteProxy.Tests.Corpus;
using RewriteProxy.Tests.Fixtures;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Guard;

/// <summary>
/// Drift selection on the labelled sibling sets (tests/corpus/siblings, dev and test reported apart, plus the older
/// Guard/Data/drift-labels.jsonl) through the real embedder, parser and guard at the siblings lane's defaults: on-topic
/// lines kept, off-topic lines dropped, and sets where an off-topic line was kept while an on-topic one was dropped.
/// The floor sweep reads the dev part only.
/// Run: dotnet test tests/RewriteProxy.Tests -c Release --filter "FullyQualifiedName~SiblingSetMeasureTests" --logger "console;verbosity=detailed"
/// </summary>
[Trait("Category", "Measure")]
public sealed class SiblingSetMeasureTests(ITestOutputHelper output)
{
    static readonly LaneOptions Lane = new()
    {
        Name = "siblings", Kind = LaneKind.Siblings, MaxDrift = DriftDefaults.SiblingMaxDrift, MinSpread = DriftDefaults.MinSpread,
        MaxSiblings = 5,
    };

    sealed record Tally(int OnKept, int OnTotal, int OffDropped, int OffTotal, int Inversions, int Sets)
    {
        public override string ToString() =>
            $"on-topic kept {OnKept}/{OnTotal} ({100.0 * OnKept / OnTotal:F1}%), off-topic dropped {OffDropped}/{OffTotal} ({100.0 * OffDropped / OffTotal:F1}%), "
            + $"sets with an off-topic line kept while an on-topic one was dropped {Inversions}/{Sets}";
    }

    static Tally Run(IEnumerable<(string Question, string Answer, string[] On, string[] Off)> sets, double relevance, double floor, List<string>? trace = null,
        double consensus = 0)
    {
        var embedder = SharedEmbedder.Instance;
        int onKept = 0, onTotal = 0, offDropped = 0, offTotal = 0, inversions = 0, count = 0;
        foreach (var (question, answer, on, off) in sets)
        {
            var candidates = SiblingParser.Parse(answer, Lane.Candidates);
            var judgement = SiblingGuard.Judge(embedder.Embed(question), candidates, embedder.Embed(candidates), answer, Lane, relevance, floor, consensus);
            var kept = judgement.Kept.Select(k => k.Text).ToHashSet(StringComparer.Ordinal);
            var on_ = on.Count(kept.Contains);
            var off_ = off.Count(t => !kept.Contains(t));
            onKept += on_;
            offDropped += off_;
            onTotal += on.Length;
            offTotal += off.Length;
            if (on_ < on.Length && off_ < off.Length) inversions++;
            if (trace is not null && on_ < on.Length && off_ < off.Length)
            {
                trace.Add(question);
                foreach (var k in judgement.Kept) trace.Add($"  kept    {k.Drift:F3} {(on.Contains(k.Text) ? "on " : off.Contains(k.Text) ? "OFF" : "?  ")} {k.Text}");
                foreach (var d in judgement.Dropped) trace.Add($"  {d.Reason,-8}{d.Drift:F3} {(on.Contains(d.Text) ? "ON " : off.Contains(d.Text) ? "off" : "?  ")} {d.Text}");
                foreach (var t in on.Where(t => !candidates.Contains(t))) trace.Add($"  not a candidate: ON  {t}");
            }
            count++;
        }
        return new Tally(onKept, onTotal, offDropped, offTotal, inversions, count);
    }

    /// <summary>
    /// Whether any cut could drop the off-topic lines that pass MaxDrift and MinSpread: every candidate in that band scored
    /// as cos(question, line) + b × mean cos(line, the other lines in the band), and the cut with the best share kept plus
    /// share dropped (Youden's J) for each b. Dev part only.
    /// </summary>
    void Separability(List<(string Question, string Answer, string[] On, string[] Off)> sets)
    {
        var embedder = SharedEmbedder.Instance;
        var lines = new List<(bool On, double Near, double Agree)>();
        foreach (var (question, answer, on, off) in sets)
        {
            var candidates = SiblingParser.Parse(answer, Lane.Candidates);
            var q = embedder.Embed(question);
            var v = embedder.Embed(candidates);
            var band = Enumerable.Range(0, candidates.Count).Where(i => 1 - SiblingGuard.Cosine(q, v[i]) is var d && d <= Lane.MaxDrift && d >= Lane.MinSpread).ToList();
            foreach (var i in band.Where(i => on.Contains(candidates[i]) || off.Contains(candidates[i])))
                lines.Add((on.Contains(candidates[i]), SiblingGuard.Cosine(q, v[i]),
                    band.Count < 2 ? 0 : band.Where(j => j != i).Average(j => SiblingGuard.Cosine(v[i], v[j]))));
        }
        int onCount = lines.Count(l => l.On), offCount = lines.Count - onCount;
        output.WriteLine("");
        output.WriteLine($"Within MaxDrift and MinSpread, dev part: {onCount} on-topic and {offCount} off-topic lines. Best cut on cos(question) + b × agreement:");
        output.WriteLine("| b | cut | on-topic kept | off-topic dropped |");
        output.WriteLine("| --- | --- | --- | --- |");
        foreach (var b in new[] { 0.0, 0.5, 1.0, 2.0 })
        {
            var best = lines.Select(l => l.Near + b * l.Agree).Distinct().Select(cut =>
                (Cut: cut, Kept: lines.Count(l => l.On && l.Near + b * l.Agree >= cut), Dropped: lines.Count(l => !l.On && l.Near + b * l.Agree < cut)))
                .MaxBy(c => (double)c.Kept / onCount + (double)c.Dropped / offCount);
            output.WriteLine($"| {b:F1} | {best.Cut:F3} | {best.Kept}/{onCount} | {best.Dropped}/{offCount} |");
        }
    }

    static IEnumerable<(string, string, string[], string[])> Part(CorpusPart part) =>
        HitCorpus.LoadSiblings(part).Select(s => (s.Question, s.Answer, s.OnTopic, s.OffTopic));

    /// <summary>The older list: each question's on- and off-topic siblings written one per line, on-topic first.</summary>
    static IEnumerable<(string, string, string[], string[])> Older() =>
        DriftLabel.Load().Select(l => (l.Question, string.Join("\n", l.SiblingsOn.Concat(l.SiblingsOff)), l.SiblingsOn, l.SiblingsOff));

    [Fact]
    public void Drift_selection_on_the_labelled_sibling_sets()
    {
        output.WriteLine($"siblings lane defaults: MaxDrift {Lane.MaxDrift}, MinSpread {Lane.MinSpread}, MaxSiblings {Lane.MaxSiblings}, λ {SiblingGuard.Relevance}");
        output.WriteLine("");
        output.WriteLine("| part | selection | result |");
        output.WriteLine("| --- | --- | --- |");
        var results = new Dictionary<string, (Tally Before, Tally After)>();
        // The test part is read only for the final figures (SIBLINGS_TEST=1), never while choosing.
        var parts = new List<(string, List<(string, string, string[], string[])>)> { ("dev", Part(CorpusPart.Dev).ToList()), ("drift-labels", Older().ToList()) };
        if (Environment.GetEnvironmentVariable("SIBLINGS_TEST") == "1") parts.Insert(1, ("test", Part(CorpusPart.Test).ToList()));
        foreach (var (name, sets) in parts)
        {
            var before = Run(sets, SiblingGuard.Relevance, Lane.MaxDrift);
            var after = Run(sets, SiblingGuard.Relevance, SiblingGuard.RelevanceFloor);
            results[name] = (before, after);
            output.WriteLine($"| {name} | MMR over every candidate (before) | {before} |");
            output.WriteLine($"| {name} | MMR within relevance floor {SiblingGuard.RelevanceFloor} (shipped) | {after} |");
        }
        output.WriteLine("");
        output.WriteLine("Relevance floor sweep, dev part only:");
        output.WriteLine("| floor (drift) | result |");
        output.WriteLine("| --- | --- |");
        var dev = Part(CorpusPart.Dev).ToList();
        if (Environment.GetEnvironmentVariable("SIBLINGS_TRACE") is { Length: > 0 } tracePath)
        {
            var trace = new List<string>();
            Run(dev, SiblingGuard.Relevance, SiblingGuard.RelevanceFloor, trace);
            File.WriteAllLines(tracePath, trace);
        }
        foreach (var floor in new[] { 0.30, 0.35, 0.40, 0.45, 0.50, 0.55, 0.60, 0.65 })
            output.WriteLine($"| {floor:F2} | {Run(dev, SiblingGuard.Relevance, floor)} |");
        output.WriteLine($"| (λ = 1, relevance alone) | {Run(dev, 1.0, Lane.MaxDrift)} |");
        output.WriteLine("");
        output.WriteLine($"Consensus ranking (mean cosine to the other candidates weighed beside the cosine to the question; not shipped), floor {SiblingGuard.RelevanceFloor}, dev part only:");
        output.WriteLine("| consensus | result |");
        output.WriteLine("| --- | --- |");
        foreach (var c in new[] { 0.0, 0.25, 0.5, 0.75, 1.0 })
            output.WriteLine($"| {c:F2} | {Run(dev, SiblingGuard.Relevance, SiblingGuard.RelevanceFloor, consensus: c)} |");

        Separability(dev);

        // The floor takes diversity out of the choice between near and far lines: never worse than MMR over every candidate.
        // It cannot remove the inversions that drift itself makes (an on-topic line beyond MaxDrift, an off-topic one within).
        Assert.All(results, r => Assert.True(r.Value.After.Inversions <= r.Value.Before.Inversions, $"{r.Key}: {r.Value.After} vs {r.Value.Before}"));
        Assert.All(results, r => Assert.True(r.Value.After.OffDropped >= r.Value.Before.OffDropped, $"{r.Key}: {r.Value.After} vs {r.Value.Before}"));
    }
}
