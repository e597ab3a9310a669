using System.Runtime.CompilerServices;
using System.Text.Json;
using System.Text.Json.Serialization;

namespace RewriteProxy.Tests.Corpus;

/// <summary>
/// The two halves of the evaluation corpus. Domains never cross: tune on <see cref="Dev"/> only, and read
/// <see cref="Test"/> only to report a number (tests/corpus/README.md).
/// </summary>
public enum CorpusPart { Dev, Test }

/// <summary>One line of tests/corpus/hit-pairs/{dev,test}.jsonl: a cached question, a new question, and whether one rewrite serves both.</summary>
public sealed record HitPair(
    string Id,
    string Domain,
    string Family,
    string Label,
    string Cached,
    string Asked,
    string Source,
    string? Note = null)
{
    public bool IsNearMiss => Label == HitCorpus.NearMiss;

    /// <summary>The WordNet word pair behind a row marked <c>wordnet-3.0: ...</c>, or null for invented rows.</summary>
    public WordNetClaim? WordNet => WordNetClaim.Parse(Source);
}

/// <summary>One line of tests/corpus/siblings/{dev,test}.jsonl: a siblings completion with every candidate line labelled.</summary>
public sealed record SiblingSet(
    string Id,
    string Domain,
    string Question,
    string Answer,
    [property: JsonPropertyName("on_topic")] string[] OnTopic,
    [property: JsonPropertyName("off_topic")] string[] OffTopic,
    string Source);

/// <summary>
/// A <c>source</c> of the form <c>wordnet-3.0: antonym pointer adj open/closed</c> or <c>wordnet-3.0: synset verb buy/purchase</c>
/// (lemmas as WordNet spells them, multiword lemmas with underscores).
/// </summary>
public sealed record WordNetClaim(bool Antonym, string Pos, string First, string Second)
{
    public const string Prefix = "wordnet-3.0: ";

    public static WordNetClaim? Parse(string source)
    {
        if (!source.StartsWith(Prefix, StringComparison.Ordinal)) return null;
        var words = source[Prefix.Length..].Split(' ', StringSplitOptions.RemoveEmptyEntries);
        var (antonym, rest) = words switch
        {
            ["antonym", "pointer", .. var r] => (true, r),
            ["synset", .. var r] => (false, r),
            _ => throw new FormatException($"unknown WordNet claim: {source}"),
        };
        if (rest is not [var pos, var pair] || pair.Split('/') is not [var first, var second])
            throw new FormatException($"expected '<pos> <lemma>/<lemma>' in: {source}");
        return new WordNetClaim(antonym, pos, first, second);
    }
}

public static class HitCorpus
{
    public const string NearMiss = "near_miss";
    public const string Paraphrase = "paraphrase";

    /// <summary>Near-miss families: the two questions need different answers.</summary>
    public static readonly IReadOnlyList<string> NearMissFamilies =
    [
        "number", "unit", "comparator", "role_swap", "entity_swap", "polarity_antonym", "polarity_other",
        "time_frame", "written_number", "negation_explicit", "negation_implicit", "identifier", "scope",
    ];

    /// <summary>Paraphrase families: any correct answer to one question answers the other.</summary>
    public static readonly IReadOnlyList<string> ParaphraseFamilies =
    [
        "synonym", "voice", "nominalisation", "reorder", "question_word", "number_form", "restructure", "register", "abbreviation",
    ];

    // Strict on purpose: an unknown field, a missing required field or a null where text is expected is a broken line, not a default.
    private static readonly JsonSerializerOptions Options = new(JsonSerializerDefaults.Web)
    {
        UnmappedMemberHandling = JsonUnmappedMemberHandling.Disallow,
        RespectNullableAnnotations = true,
        RespectRequiredConstructorParameters = true,
    };

    public static string Root => Path.GetFullPath(Path.Combine(Path.GetDirectoryName(ThisFile())!, "..", "..", "corpus"));

    public static string FileName(CorpusPart part) => part == CorpusPart.Dev ? "dev.jsonl" : "test.jsonl";

    /// <summary>Every hit pair of one part; the files are read from the source tree, so nothing is copied to the output folder.</summary>
    public static IReadOnlyList<HitPair> Load(CorpusPart part) => Read<HitPair>(Path.Combine(Root, "hit-pairs", FileName(part)));

    /// <summary>Every sibling set of one part.</summary>
    public static IReadOnlyList<SiblingSet> LoadSiblings(CorpusPart part) => Read<SiblingSet>(Path.Combine(Root, "siblings", FileName(part)));

    /// <summary>Parses one line; throws with the reason when the line is not a well-formed record.</summary>
    public static T ParseLine<T>(string line) => JsonSerializer.Deserialize<T>(line, Options)
        ?? throw new JsonException("the line is JSON null");

    private static List<T> Read<T>(string path) =>
        File.ReadLines(path).Where(l => !string.IsNullOrWhiteSpace(l)).Select(ParseLine<T>).ToList();

    private static string ThisFile([CallerFilePath] string here = "") => here;
}
