using System.Text.RegularExpressions;

namespace RewriteProxy.Tests.Corpus;

/// <summary>
/// The evaluation corpus (tests/corpus) is data other tests measure the product with, so its shape is checked here:
/// well-formed lines, the fixed label vocabulary, the dev/test split by domain, the promised counts, and the
/// WordNet rows against WordNet itself. Nothing here runs the product.
/// </summary>
public sealed partial class CorpusShapeTests
{
    private static IEnumerable<HitPair> AllPairs => HitCorpus.Load(CorpusPart.Dev).Concat(HitCorpus.Load(CorpusPart.Test));

    private static IEnumerable<SiblingSet> AllSets => HitCorpus.LoadSiblings(CorpusPart.Dev).Concat(HitCorpus.LoadSiblings(CorpusPart.Test));

    [Theory]
    [InlineData("hit-pairs", CorpusPart.Dev)]
    [InlineData("hit-pairs", CorpusPart.Test)]
    [InlineData("siblings", CorpusPart.Dev)]
    [InlineData("siblings", CorpusPart.Test)]
    public void Every_line_parses_with_every_field_filled(string corpus, CorpusPart part)
    {
        var path = Path.Combine(HitCorpus.Root, corpus, HitCorpus.FileName(part));
        var failures = new List<string>();
        var number = 0;
        foreach (var line in File.ReadLines(path))
        {
            number++;
            if (string.IsNullOrWhiteSpace(line)) { failures.Add($"line {number}: blank"); continue; }
            try
            {
                var texts = corpus == "hit-pairs" ? Texts(HitCorpus.ParseLine<HitPair>(line)) : Texts(HitCorpus.ParseLine<SiblingSet>(line));
                if (texts.Any(string.IsNullOrWhiteSpace)) failures.Add($"line {number}: an empty field");
            }
            catch (Exception e) when (e is System.Text.Json.JsonException or FormatException)
            {
                failures.Add($"line {number}: {e.Message}");
            }
        }
        Assert.True(number > 0, $"{path} is empty");
        Assert.Empty(failures);
    }

    private static string[] Texts(HitPair p) => [p.Id, p.Domain, p.Family, p.Label, p.Cached, p.Asked, p.Source];

    private static string[] Texts(SiblingSet s) => [s.Id, s.Domain, s.Question, s.Answer, s.Source, .. s.OnTopic, .. s.OffTopic];

    [Fact]
    public void Ids_are_unique_and_name_their_domain()
    {
        var ids = AllPairs.Select(p => (p.Id, p.Domain)).Concat(AllSets.Select(s => (s.Id, s.Domain))).ToList();
        Assert.Empty(ids.GroupBy(x => x.Id).Where(g => g.Count() > 1).Select(g => g.Key));
        Assert.Empty(AllPairs.Where(p => !Regex.IsMatch(p.Id, $"^{Regex.Escape(p.Domain)}-\\d{{3}}$")).Select(p => p.Id));
        Assert.Empty(AllSets.Where(s => !s.Id.StartsWith(s.Domain + "-", StringComparison.Ordinal)).Select(s => s.Id));
    }

    [Fact]
    public void Labels_and_families_come_from_the_fixed_lists()
    {
        var wrong = AllPairs.Where(p => p.Label switch
        {
            HitCorpus.NearMiss => !HitCorpus.NearMissFamilies.Contains(p.Family),
            HitCorpus.Paraphrase => !HitCorpus.ParaphraseFamilies.Contains(p.Family),
            _ => true,
        }).Select(p => $"{p.Id}: {p.Label}/{p.Family}");
        Assert.Empty(wrong);
    }

    [Fact]
    public void Questions_are_six_to_twenty_five_words_and_the_two_differ()
    {
        static int Words(string q) => q.Split(' ', StringSplitOptions.RemoveEmptyEntries).Length;
        Assert.Empty(AllPairs.Where(p => Words(p.Cached) is < 6 or > 25 || Words(p.Asked) is < 6 or > 25).Select(p => p.Id));
        Assert.Empty(AllPairs.Where(p => Normal(p.Cached) == Normal(p.Asked)).Select(p => p.Id));
    }

    [Fact]
    public void Sources_are_invented_or_a_wordnet_pair_of_the_matching_family()
    {
        var wrong = new List<string>();
        foreach (var p in AllPairs)
        {
            if (p.Source == "invented")
            {
                // polarity_antonym is defined as a direct WordNet antonym pair, so every such row must say which one.
                if (p.Family == "polarity_antonym") wrong.Add($"{p.Id}: polarity_antonym without its WordNet pair");
                continue;
            }
            WordNetClaim? claim;
            try { claim = p.WordNet; }
            catch (FormatException e) { wrong.Add($"{p.Id}: {e.Message}"); continue; }
            if (claim is null) wrong.Add($"{p.Id}: source '{p.Source}'");
            else if (claim.Antonym != (p.Family == "polarity_antonym") || (!claim.Antonym && p.Family != "synonym"))
                wrong.Add($"{p.Id}: a WordNet {(claim.Antonym ? "antonym" : "synset")} pair on family {p.Family}");
        }
        Assert.Empty(wrong);
    }

    [Fact]
    public void No_question_pair_or_question_appears_in_both_parts()
    {
        static string Pair(HitPair p) => string.Join(" || ", new[] { Normal(p.Cached), Normal(p.Asked) }.Order(StringComparer.Ordinal));
        var dev = HitCorpus.Load(CorpusPart.Dev);
        var test = HitCorpus.Load(CorpusPart.Test);
        Assert.Empty(dev.Select(Pair).Intersect(test.Select(Pair)));
        var devQuestions = dev.SelectMany(p => new[] { p.Cached, p.Asked }).Concat(HitCorpus.LoadSiblings(CorpusPart.Dev).Select(s => s.Question)).Select(Normal);
        var testQuestions = test.SelectMany(p => new[] { p.Cached, p.Asked }).Concat(HitCorpus.LoadSiblings(CorpusPart.Test).Select(s => s.Question)).Select(Normal);
        Assert.Empty(devQuestions.Intersect(testQuestions));
    }

    [Fact]
    public void Dev_and_test_domains_are_disjoint_and_the_sibling_sets_follow_the_same_split()
    {
        var devDomains = HitCorpus.Load(CorpusPart.Dev).Select(p => p.Domain).ToHashSet();
        var testDomains = HitCorpus.Load(CorpusPart.Test).Select(p => p.Domain).ToHashSet();
        Assert.Empty(devDomains.Intersect(testDomains));
        Assert.Subset(devDomains, HitCorpus.LoadSiblings(CorpusPart.Dev).Select(s => s.Domain).ToHashSet());
        Assert.Subset(testDomains, HitCorpus.LoadSiblings(CorpusPart.Test).Select(s => s.Domain).ToHashSet());
    }

    [Fact]
    public void Hit_pair_counts_meet_the_minimums()
    {
        var dev = HitCorpus.Load(CorpusPart.Dev);
        var test = HitCorpus.Load(CorpusPart.Test);
        var all = dev.Concat(test).ToList();
        Assert.True(all.Count >= 800, $"{all.Count} pairs, at least 800 wanted");
        Assert.True(all.Select(p => p.Domain).Distinct().Count() >= 16, "at least 16 domains wanted");

        var families = HitCorpus.NearMissFamilies.Concat(HitCorpus.ParaphraseFamilies).ToList();
        Assert.Empty(families.Where(f => !dev.Any(p => p.Family == f)).Select(f => "dev lacks " + f));
        // The held-out part must be big enough per family to report a rate, not an anecdote.
        Assert.Empty(families.Select(f => (f, n: test.Count(p => p.Family == f))).Where(x => x.n < 12).Select(x => $"test has {x.n} {x.f}"));

        var paraphraseShare = all.Count(p => !p.IsNearMiss) / (double)all.Count;
        Assert.InRange(paraphraseShare, 0.35, 0.55);
    }

    [Fact]
    public void Sibling_set_counts_meet_the_minimums()
    {
        var sets = AllSets.ToList();
        Assert.True(sets.Count >= 120, $"{sets.Count} sibling sets, at least 120 wanted");
        var eightLine = sets.Count(s => s.OnTopic.Length == 5 && s.OffTopic.Length == 3 && Candidates(s.Answer).Count == 8);
        Assert.True(eightLine >= 30, $"{eightLine} eight-line sets with five on-topic and three off-topic lines, at least 30 wanted");
        var typical = sets.Count(s => s.OnTopic.Length is >= 3 and <= 5 && s.OffTopic.Length <= 2);
        Assert.True(typical > sets.Count / 2, $"only {typical} of {sets.Count} sets have 3-5 on-topic and 0-2 off-topic lines");
    }

    [Fact]
    public void Sibling_labels_are_exactly_the_candidate_lines_of_the_answer()
    {
        var wrong = new List<string>();
        foreach (var s in AllSets)
        {
            var lines = Candidates(s.Answer);
            var labelled = s.OnTopic.Concat(s.OffTopic).ToHashSet(StringComparer.Ordinal);
            if (labelled.Count != s.OnTopic.Length + s.OffTopic.Length) wrong.Add($"{s.Id}: a line is labelled twice");
            // A preamble ("Here are some related questions:") may open the answer and is labelled neither way.
            var first = lines.FindIndex(labelled.Contains);
            var preamble = first < 0 ? lines : lines.Take(first).ToList();
            if (preamble.Count > 1 || preamble.Any(l => !l.EndsWith(':'))) wrong.Add($"{s.Id}: unlabelled lines {string.Join(" | ", preamble)}");
            var rest = first < 0 ? [] : lines.Skip(first).ToList();
            if (!rest.ToHashSet(StringComparer.Ordinal).SetEquals(labelled) || rest.Count != labelled.Count)
                wrong.Add($"{s.Id}: labelled lines and answer lines differ");
        }
        Assert.Empty(wrong);
    }

    [WordNetFact]
    public void Every_wordnet_row_names_a_pair_that_is_in_wordnet()
    {
        var wrong = AllPairs.Where(p => p.WordNet is { } c && !(c.Antonym
                ? WordNetData.DirectAntonyms(c.Pos, c.First, c.Second)
                : WordNetData.SameSynset(c.Pos, c.First, c.Second)))
            .Select(p => $"{p.Id}: {p.Source}").ToList();
        Assert.True(AllPairs.Any(p => p.WordNet is not null), "no rows are marked wordnet-3.0");
        Assert.Empty(wrong);
    }

    /// <summary>The non-blank lines of an answer without list markers ("1.", "2)", "-", "*", "•").</summary>
    private static List<string> Candidates(string answer) => answer.Split('\n')
        .Select(l => ListMarker().Replace(l.Trim(), ""))
        .Where(l => l.Length > 0)
        .ToList();

    private static string Normal(string question) => Regex.Replace(question.Trim().ToLowerInvariant(), @"\s+", " ");

    [GeneratedRegex(@"^(?:\d+[.)]|[-*•])\s+")]
    private static partial Regex ListMarker();
}
