
namespace RewriteProxy.Cache;

/// <summary>
/// Why the hit decision refused a semantic candidate, in the order it checks (the anchor guard's reasons first); the
/// <c>reason</c> label of <c>rewriteproxy_guard_rejections_total</c>.
/// </summary>
public enum AnchorReason
{
    /// <summary>One question negates what the other does not.</summary>
    Negation,
    /// <summary>Numbers differ (years, amounts, versions, ordinals, written-out numbers).</summary>
    Number,
    /// <summary>Units or currencies differ, or a number carries another unit.</summary>
    Unit,
    /// <summary>A code, name, acronym or quoted string is in one question only.</summary>
    Identifier,
    /// <summary>A word in one question has its antonym in the other.</summary>
    Contrast,
    /// <summary>The hit decision: time frames differ ("monthly" / "annually", "this quarter" / "last quarter", "per day" / "per meal").</summary>
    TimeFrame,
    /// <summary>The hit decision: a comparator around a number points the other way ("over 25" / "under 25", "within" / "after 12 months").</summary>
    Comparator,
    /// <summary>The hit decision: one question asks about an obligation ("must I", "do I have to") and the other does not ("can I").</summary>
    Obligation,
    /// <summary>The hit decision: two parts of the question trade places ("the buyer pays the seller" / "the seller pays the buyer").</summary>
    Role,
    /// <summary>The hit decision's learned combiner: what the word alignment left unexplained, weighed with the similarity, says the
    /// two questions differ (Cache/Resources/hit-combiner.tsv).</summary>
    Learned,
}

/// <summary>
/// Outcome of comparing two questions' anchors. <see cref="Reason"/> is one of <see cref="AnchorReason"/> when
/// <see cref="Agree"/> is false; <see cref="Detail"/> says what differed, for the event log (never a metric label).
/// </summary>
public readonly record struct AnchorVerdict(bool Agree, AnchorReason? Reason, string? Detail)
{
    public static AnchorVerdict Agreed { get; } = new(true, null, null);

    public static AnchorVerdict Refused(AnchorReason reason, string detail) => new(false, reason, detail);
}

/// <summary>
/// Second test of a semantic hit, after similarity: the asked and the cached question must agree on what an
/// embedding barely sees — numbers, units, negations, identifiers, and words of opposite meaning (WordNet 3.0
/// antonyms). "… in 2022?" and "… in 2023?" score 0.97 with all-MiniLM-L6-v2; only this guard tells them apart.
/// Thread-safe and allocation-light in <see cref="Compare(Anchors, Anchors)"/>, which runs on every candidate;
/// <see cref="Extract"/> runs once per question. Rules and measurements: docs/measurements/anchor-guard.md.
/// </summary>
public sealed partial class AnchorGuard
{
    /// <summary>More than this share of ALL-CAPITAL words means the question is shouted, not full of acronyms.</summary>
    const double ShoutedShare = 0.5;

    /// <summary>Fewest words before a question can count as shouted ("Is ICU open?" is not).</summary>
    const int ShoutedMinWords = 3;

    /// <summary>Shortest stem after a negative prefix that counts as a negated word ("unsafe" → "safe"; "unit" is no "it").</summary>
    const int MinPrefixedStem = 4;

    static readonly string[] NegativePrefixes = ["un", "non"];

    /// <summary>Words that start like a negative prefix but are not a negation of their rest.</summary>
    static readonly HashSet<string> NotNegatedByPrefix = new(StringComparer.Ordinal) { "unless", "under", "understand", "undergo", "uniform", "universe", "university", "unique", "united", "union", "nonetheless" };

    readonly AnchorAntonyms _antonyms;

    /// <summary>A guard over the embedded WordNet 3.0 antonym table.</summary>
    public AnchorGuard() : this(AnchorAntonyms.Default) { }

    internal AnchorGuard(AnchorAntonyms antonyms) => _antonyms = antonyms;

    /// <summary>Compares two questions' anchors; the first difference found decides the reason, in <see cref="AnchorReason"/> order.</summary>
    public AnchorVerdict Compare(Anchors asked, Anchors cached)
    {
        if (asked.Negations != cached.Negations)
            return AnchorVerdict.Refused(AnchorReason.Negation, $"negations: asked {asked.Negations}, cached {cached.Negations}");
        if (!SameList(asked.Numbers, cached.Numbers))
            return AnchorVerdict.Refused(AnchorReason.Number, Differ("numbers", asked.Numbers, cached.Numbers));
        if (!SameList(asked.Units, cached.Units))
            return AnchorVerdict.Refused(AnchorReason.Unit, Differ("units", asked.Units, cached.Units));
        if (!SameList(asked.Quantities, cached.Quantities))
            return AnchorVerdict.Refused(AnchorReason.Unit, Differ("quantities", asked.Quantities, cached.Quantities));
        if ((MissingIdentifier(asked, cached) ?? MissingIdentifier(cached, asked)) is { } missing)
            return AnchorVerdict.Refused(AnchorReason.Identifier, missing);
        if (Opposite(asked, cached) is { } contrast)
            return AnchorVerdict.Refused(AnchorReason.Contrast, contrast);
        return AnchorVerdict.Agreed;
    }

    /// <summary>Extracts both questions and compares them: for tests and one-off checks; the cache keeps stored anchors.</summary>
    public AnchorVerdict Compare(string asked, string cached) => Compare(Extract(asked), Extract(cached));

    static bool SameList(IReadOnlyList<string> a, IReadOnlyList<string> b)
    {
        if (a.Count != b.Count) return false;
        for (var i = 0; i < a.Count; i++)
            if (!string.Equals(a[i], b[i], StringComparison.Ordinal)) return false;
        return true;
    }

    static string Differ(string what, IReadOnlyList<string> asked, IReadOnlyList<string> cached) =>
        $"{what}: asked [{string.Join(", ", asked)}], cached [{string.Join(", ", cached)}]";

    /// <summary>Identifiers must occur among the other question's words (so case and a leading position don't matter), quotes in its text.</summary>
    static string? MissingIdentifier(Anchors from, Anchors other)
    {
        foreach (var id in from.Identifiers)
        {
            // A plural s does not make another name ("Saturday" / "Saturdays").
            if (other.Tokens.Contains(id) || other.Tokens.Contains(id + "s")
                || (id.Length > 2 && id[^1] == 's' && other.Tokens.Contains(id[..^1]))) continue;
            if (Spelled(id, other.Text)) continue;
            // The other question has the short form: "NI" for "National Insurance", "Sat" for "Saturday".
            if (other.Identifiers.Any(o => o.Length < id.Length && Spelled(o, from.Text) && SpelledFrom(o, id, from.Text))) continue;
            return $"identifier '{id}' only in one question";
        }
        foreach (var quote in from.Quotes)
            if (!other.Text.Contains(quote, StringComparison.Ordinal)) return $"quoted \"{quote}\" only in one question";
        return null;
    }

    /// <summary>
    /// An abbreviation written out in the other question: the initials of consecutive words ("HR" / "human resources",
    /// "IDP" / "international driving permit"), or the letters in order of one longer word from its first ("ID" /
    /// "identification"). Letters only, 2 to 5 of them: codes with digits must match as written.
    /// </summary>
    static bool Spelled(string id, string otherText)
    {
        if (id.Length is < 2 or > 5 || !id.All(char.IsAsciiLetterLower)) return false;
        var words = otherText.Split([' ', '-', '/', ',', '.', '?', '!', '(', ')', ':', ';'], StringSplitOptions.RemoveEmptyEntries);
        for (var s = 0; s + id.Length <= words.Length; s++)
        {
            var initials = true;
            for (var c = 0; c < id.Length && initials; c++) initials = words[s + c][0] == id[c];
            if (initials) return true;
        }
        foreach (var w in words)
        {
            if (w.Length < id.Length + 2 || w[0] != id[0]) continue;
            var i = 0;
            foreach (var c in w)
                if (i < id.Length && id[i] == c) i++;
            if (i == id.Length) return true;
        }
        return false;
    }

    /// <summary>The short form <paramref name="shortForm"/> stands for words of <paramref name="text"/> that include <paramref name="id"/>.</summary>
    static bool SpelledFrom(string shortForm, string id, string text)
    {
        var words = text.Split([' ', '-', '/', ',', '.', '?', '!', '(', ')', ':', ';'], StringSplitOptions.RemoveEmptyEntries);
        var at = Array.IndexOf(words, id);
        if (at < 0) return false;
        if (Spelled(shortForm, id)) return true;
        for (var s = Math.Max(0, at - shortForm.Length + 1); s <= at && s + shortForm.Length <= words.Length; s++)
        {
            var initials = true;
            for (var c = 0; c < shortForm.Length && initials; c++) initials = words[s + c][0] == shortForm[c];
            if (initials) return true;
        }
        return false;
    }

    /// <summary>
    /// A lemma only in the asked question whose antonym is only in the cached one. Pairs present in both questions
    /// ("open before, closed after") cancel out.
    /// </summary>
    string? Opposite(Anchors asked, Anchors cached)
    {
        if ((NegatedByPrefix(asked, cached) ?? NegatedByPrefix(cached, asked)) is { } prefixed) return prefixed;
        foreach (var lemma in asked.Lemmas)
        {
            if (cached.LemmaSet.Contains(lemma)) continue;
            foreach (var antonym in _antonyms.AntonymsOf(lemma))
                if (cached.LemmaSet.Contains(antonym) && !asked.LemmaSet.Contains(antonym))
                    return $"'{lemma}' asked, its antonym '{antonym}' cached";
        }
        return null;
    }

    /// <summary>"unsafe" in one question and "safe" only in the other: WordNet lists few un-/non- opposites ("safe" has only "dangerous").</summary>
    static string? NegatedByPrefix(Anchors from, Anchors other)
    {
        foreach (var stem in from.PrefixNegated)
            if (other.Tokens.Contains(stem) && !from.Tokens.Contains(stem) && !other.PrefixNegated.Contains(stem))
                return $"'{stem}' negated by a prefix in one question only";
        return null;
    }
}
