using System.Globalization;
using System.Text;
using System.Text.RegularExpressions;

namespace RewriteProxy.Cache;

/// <summary>Why the anchor guard refused a semantic candidate: a fixed list, used as a metric label value.</summary>
public static class AnchorReason
{
    public const string Number = "number";
    public const string Unit = "unit";
    public const string Negation = "negation";
    public const string Identifier = "identifier";
    public const string Contrast = "contrast";

    /// <summary>The hit decision: two parts of the question trade places ("the buyer pays the seller" / "the seller pays the buyer").</summary>
    public const string Role = "role";

    /// <summary>The hit decision: a word was replaced, added or dropped, and WordNet has no sense the two share ("diesel" / "petrol").</summary>
    public const string Substitution = "substitution";

    /// <summary>The anchor guard's own reasons, in the order it checks them.</summary>
    public static readonly IReadOnlyList<string> Guard = [Negation, Number, Unit, Identifier, Contrast];

    /// <summary>Every reason (the metric label values), in the order the anchor guard and then the hit decision check them.</summary>
    public static readonly IReadOnlyList<string> All = [.. Guard, Role, Substitution];
}

/// <summary>
/// Outcome of comparing two questions' anchors. <see cref="Reason"/> is one of <see cref="AnchorReason"/> when
/// <see cref="Agree"/> is false; <see cref="Detail"/> says what differed, for the event log (never a metric label).
/// </summary>
public readonly record struct AnchorVerdict(bool Agree, string? Reason, string? Detail)
{
    public static AnchorVerdict Agreed { get; } = new(true, null, null);

    public static AnchorVerdict Refused(string reason, string detail) => new(false, reason, detail);
}

/// <summary>
/// Second test of a semantic hit, after similarity: the asked and the cached question must agree on what an
/// embedding barely sees — numbers, units, negations, identifiers, and words of opposite meaning (WordNet 3.0
/// antonyms). "… in 2022?" and "… in 2023?" score 0.97 with all-MiniLM-L6-v2; only this guard tells them apart.
/// Thread-safe and allocation-light in <see cref="Compare(Anchors, Anchors)"/>, which runs on every candidate;
/// <see cref="Extract"/> runs once per question. Rules and measurements: DEVELOPERS.md ("Anchor guard").
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

    /// <summary>Compares two questions' anchors; the first difference found decides the reason, in <see cref="AnchorReason.All"/> order.</summary>
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

    // ---- extraction ----

    readonly record struct Token(int Start, int End, string Raw, bool Symbol, bool SentenceStart)
    {
        public string Lower => Raw.ToLowerInvariant();
    }

    [GeneratedRegex(@"°[CFcf]?|[$€£¥%]|[\p{L}\p{N}](?:[\p{L}\p{N}]|['\-_./](?=[\p{L}\p{N}])|,(?<=\d,)(?=\d{3}(?!\d)))*")]
    private static partial Regex TokenPattern();

    [GeneratedRegex(@"""([^""]+)""|“([^”]+)”|‘([^’]+)’|(?<![\p{L}\p{N}])'(?=\S)([^']*[^\s'])'(?![\p{L}\p{N}])")]
    private static partial Regex QuotePattern();

    [GeneratedRegex(@"^(?:\d{1,3}(?:,\d{3})+|\d+)(?:\.\d+)?$")]
    private static partial Regex PlainNumber();

    [GeneratedRegex(@"^v?(\d+(?:\.\d+){2,})$|^v(\d+(?:\.\d+)?)$")]
    private static partial Regex VersionNumber();

    [GeneratedRegex(@"^(\d+)(?:st|nd|rd|th)$")]
    private static partial Regex DigitOrdinal();

    [GeneratedRegex(@"^((?:\d{1,3}(?:,\d{3})+|\d+)(?:\.\d+)?)([a-z°%][a-z°%/.]*)$")]
    private static partial Regex NumberWithSuffix();

    [GeneratedRegex(@"^[\d.,\-/]+$")]
    private static partial Regex DigitsAndSeparators();

    [GeneratedRegex(@"\s+")]
    private static partial Regex Whitespace();

    /// <summary>Extracts the anchors of one question. Never throws on text; empty text has no anchors.</summary>
    public Anchors Extract(string question)
    {
        var text = question.Replace('’', '\'').Replace('−', '-');
        var tokens = Tokenize(text);
        var shouted = IsShouted(tokens);

        var numbers = new SortedSet<string>(StringComparer.Ordinal);
        var units = new SortedSet<string>(StringComparer.Ordinal);
        var quantities = new SortedSet<string>(StringComparer.Ordinal);
        var identifiers = new SortedSet<string>(StringComparer.Ordinal);
        var words = new HashSet<string>(StringComparer.Ordinal);
        var lemmas = new List<string>();
        var prefixNegated = new List<string>();
        var negations = 0;

        for (var i = 0; i < tokens.Count; i++)
        {
            var token = tokens[i];
            var lower = token.Lower;

            if (token.Symbol)
            {
                if (lower.Length == 1 && AnchorLexicon.CurrencySymbols.TryGetValue(lower[0], out var currency)) units.Add(currency);
                else units.Add(AnchorLexicon.BoundUnits.GetValueOrDefault(lower, lower));
                continue;
            }

            if (ReadNumber(text, tokens, i, out var value, out var consumed))
            {
                var unit = ReadUnit(text, tokens, i, ref consumed);
                numbers.Add(value);
                if (unit is not null)
                {
                    units.Add(unit);
                    quantities.Add($"{value} {unit}");
                }
                for (var k = i; k <= i + consumed; k++) words.Add(Normalise(tokens[k].Lower));
                i += consumed;
                continue;
            }

            if (CountedCompound(lower) is { } counted)
            {
                // "a five-day course", "a 10-trip card": the count is a number like any other, the rest a plain word.
                numbers.Add(counted.Number);
                words.Add(Normalise(lower));
                words.Add(counted.Word);
                _antonyms.AddLemmas(counted.Word, lemmas);
                continue;
            }

            if (lower.Any(char.IsDigit))
            {
                if (DigitsAndSeparators().IsMatch(lower))
                {
                    // Dates and ranges: "2024-05-01", "5-10", "2022/23".
                    foreach (var part in lower.Split('-', '/', StringSplitOptions.RemoveEmptyEntries))
                        if (CanonicalDigits(part) is { } number) numbers.Add(number);
                    continue;
                }
                var code = Normalise(lower);
                identifiers.Add(code);
                words.Add(code);
                continue;
            }

            // "No. 5" is a number sign, not a negation.
            var numberSign = lower == "no" && token.End < text.Length && text[token.End] == '.'
                && i + 1 < tokens.Count && char.IsDigit(tokens[i + 1].Raw[0]);
            ReadWord(token, lower, shouted, !numberSign, ref negations, identifiers, words, lemmas, prefixNegated);
            if (AnchorLexicon.FreeUnits.TryGetValue(token.Raw, out var freeUnit)) units.Add(freeUnit);
        }

        var quotes = new SortedSet<string>(StringComparer.Ordinal);
        foreach (Match match in QuotePattern().Matches(text))
        {
            var inner = match.Groups[1].Success ? match.Groups[1].Value
                : match.Groups[2].Success ? match.Groups[2].Value
                : match.Groups[3].Success ? match.Groups[3].Value
                : match.Groups[4].Value;
            var normalised = Whitespace().Replace(inner.Trim().ToLowerInvariant(), " ");
            if (normalised.Length > 0) quotes.Add(normalised);
        }
        var flatText = Whitespace().Replace(
            text.ToLowerInvariant().Replace("\"", " ").Replace("“", " ").Replace("”", " ").Replace("‘", " ").Replace("’", " "), " ");

        return new Anchors(
            [.. numbers], [.. units], [.. quantities], negations, [.. identifiers], [.. quotes], [.. lemmas], [.. prefixNegated], words, flatText);
    }

    static List<Token> Tokenize(string text)
    {
        var tokens = new List<Token>();
        var previousEnd = 0;
        foreach (Match match in TokenPattern().Matches(text))
        {
            var gap = text.AsSpan(previousEnd, match.Index - previousEnd);
            var sentenceStart = tokens.Count == 0 || gap.IndexOfAny(".?!:;\n\"“(") >= 0;
            var symbol = !char.IsLetterOrDigit(match.Value[0]);
            tokens.Add(new Token(match.Index, match.Index + match.Length, match.Value, symbol, sentenceStart));
            previousEnd = match.Index + match.Length;
        }
        return tokens;
    }

    static bool IsShouted(List<Token> tokens)
    {
        int words = 0, capitals = 0;
        foreach (var token in tokens)
        {
            if (token.Symbol || token.Raw.Length < 2 || !token.Raw.All(char.IsLetter)) continue;
            words++;
            if (token.Raw.All(char.IsUpper)) capitals++;
        }
        return words >= ShoutedMinWords && capitals > words * ShoutedShare;
    }

    /// <summary>Lower-case token without the separators that spellings of one code vary in ("XR-200", "xr200").</summary>
    static string Normalise(string lower)
    {
        if (lower.EndsWith("'s", StringComparison.Ordinal)) lower = lower[..^2];
        if (lower.AsSpan().IndexOfAny("-_./'") < 0) return lower;
        var builder = new StringBuilder(lower.Length);
        foreach (var c in lower)
            if (c is not ('-' or '_' or '.' or '/' or '\'')) builder.Append(c);
        return builder.ToString();
    }

    void ReadWord(Token token, string lower, bool shouted, bool mayNegate, ref int negations,
        SortedSet<string> identifiers, HashSet<string> words, List<string> lemmas, List<string> prefixNegated)
    {
        var raw = token.Raw;
        var bare = lower.EndsWith("'s", StringComparison.Ordinal) ? lower[..^2] : lower;
        words.Add(Normalise(lower));

        if (bare.EndsWith("n't", StringComparison.Ordinal)) negations++;
        else if (mayNegate && AnchorLexicon.Negations.Contains(bare)) negations++;

        // Identifiers: ALL-CAPITAL words (acronyms, not units), words with an inner capital, and capitalised words
        // that do not open a sentence (names: "Riverside", "Monday"). "I" and "I'm" are neither.
        var letters = raw.Where(char.IsLetter).ToArray();
        var allCapitals = letters.Length >= 2 && letters.All(char.IsUpper);
        var innerCapital = false;
        for (var k = 1; k < raw.Length; k++)
            if (char.IsUpper(raw[k]) && char.IsLower(raw[k - 1])) { innerCapital = true; break; }
        var capitalised = char.IsUpper(raw[0]) && letters.Length >= 2 && letters.Skip(1).Any(char.IsLower);
        var isUnit = AnchorLexicon.FreeUnits.ContainsKey(raw);
        if (!isUnit && !raw.StartsWith("I'", StringComparison.Ordinal)
            && (innerCapital || (!shouted && allCapitals) || (!shouted && capitalised && !token.SentenceStart)))
            identifiers.Add(Normalise(lower));

        // Productive negative prefixes (common practice: un-, non-); a stem of fewer than MinPrefixedStem letters
        // is more likely a word of its own ("unit", "until", "union") than a negated one.
        var flat = Normalise(bare);
        foreach (var prefix in NegativePrefixes)
            if (flat.Length - prefix.Length >= MinPrefixedStem && flat.StartsWith(prefix, StringComparison.Ordinal)
                && !NotNegatedByPrefix.Contains(flat))
                prefixNegated.Add(flat[prefix.Length..]);

        // Contrast lemmas: the whole word first (WordNet has "nonsmoker", "unpaid"), its hyphen parts otherwise.
        var before = lemmas.Count;
        var joined = Normalise(bare);
        _antonyms.AddLemmas(joined, lemmas);
        if (lemmas.Count == before && bare.Contains('-'))
            foreach (var part in bare.Split('-', StringSplitOptions.RemoveEmptyEntries))
                _antonyms.AddLemmas(part, lemmas);
        for (var k = lemmas.Count - 1; k >= before; k--)
            if (lemmas.IndexOf(lemmas[k]) < k) lemmas.RemoveAt(k);
    }

    /// <summary>
    /// A number at token <paramref name="i"/>: digits, a version, an ordinal, or a run of number words. Sets
    /// <paramref name="consumed"/> to how many tokens after <paramref name="i"/> belong to it.
    /// </summary>
    static bool ReadNumber(string text, List<Token> tokens, int i, out string value, out int consumed)
    {
        consumed = 0;
        value = "";
        var lower = tokens[i].Lower;

        if (PlainNumber().IsMatch(lower))
        {
            if (!decimal.TryParse(lower.Replace(",", ""), NumberStyles.AllowDecimalPoint, CultureInfo.InvariantCulture, out var number))
            {
                value = lower.Replace(",", "");
                return true;
            }
            number *= ReadMultipliers(tokens, i, ref consumed);
            value = Sign(text, tokens[i]) + Format(number);
            return true;
        }
        if (VersionNumber().Match(lower) is { Success: true } version)
        {
            value = version.Groups[1].Success ? version.Groups[1].Value : Format(decimal.Parse(version.Groups[2].Value, CultureInfo.InvariantCulture));
            return true;
        }
        if (DigitOrdinal().Match(lower) is { Success: true } ordinal)
        {
            value = Ordinal(long.Parse(ordinal.Groups[1].Value, CultureInfo.InvariantCulture));
            return true;
        }
        if (NumberWithSuffix().Match(lower) is { Success: true } withSuffix
            && AnchorLexicon.BoundUnits.ContainsKey(withSuffix.Groups[2].Value))
        {
            // "5kg", "100ms", "2GB": the unit is read by ReadUnit from the same token.
            value = Sign(text, tokens[i]) + CanonicalDigits(withSuffix.Groups[1].Value);
            return true;
        }
        if (WordOrdinal(lower) is { } wordOrdinal)
        {
            value = Ordinal(wordOrdinal);
            return true;
        }
        return ReadNumberWords(tokens, i, out value, out consumed);
    }

    static string Sign(string text, Token token) =>
        token.Start >= 1 && text[token.Start - 1] == '-' && (token.Start == 1 || char.IsWhiteSpace(text[token.Start - 2]) || text[token.Start - 2] == '(')
            ? "-" : "";

    static decimal ReadMultipliers(List<Token> tokens, int i, ref int consumed)
    {
        decimal factor = 1;
        while (i + consumed + 1 < tokens.Count && AnchorLexicon.Multipliers.TryGetValue(tokens[i + consumed + 1].Lower, out var multiplier))
        {
            factor *= multiplier;
            consumed++;
        }
        return factor;
    }

    static long? WordOrdinal(string lower)
    {
        if (AnchorLexicon.Ordinals.TryGetValue(lower, out var simple)) return simple;
        // "twenty-first"
        var dash = lower.IndexOf('-');
        if (dash > 0 && AnchorLexicon.Cardinals.TryGetValue(lower[..dash], out var tens) && tens >= 20 && tens % 10 == 0
            && AnchorLexicon.Ordinals.TryGetValue(lower[(dash + 1)..], out var ones) && ones < 10)
            return tens + ones;
        return null;
    }

    static int? CardinalWord(string lower)
    {
        if (AnchorLexicon.Cardinals.TryGetValue(lower, out var simple)) return simple;
        var dash = lower.IndexOf('-');
        if (dash > 0 && AnchorLexicon.Cardinals.TryGetValue(lower[..dash], out var tens) && tens >= 20 && tens % 10 == 0
            && AnchorLexicon.Cardinals.TryGetValue(lower[(dash + 1)..], out var ones) && ones is > 0 and < 10)
            return tens + ones;
        return null;
    }

    /// <summary>"two hundred and five", "a dozen", "three thousand": standard left-to-right accumulation.</summary>
    static bool ReadNumberWords(List<Token> tokens, int i, out string value, out int consumed)
    {
        value = "";
        consumed = 0;
        var first = tokens[i].Lower;
        if (CardinalWord(first) is null && !AnchorLexicon.Multipliers.ContainsKey(first)) return false;
        if (first == "one" && (i + 1 >= tokens.Count || !IsNumberWord(tokens[i + 1].Lower))
            && ((i > 0 && AnchorLexicon.PronounOneBefore.Contains(tokens[i - 1].Lower))
                || (i > 0 && AnchorLexicon.Ordinals.ContainsKey(tokens[i - 1].Lower))
                || i + 1 >= tokens.Count
                || AnchorLexicon.PronounOneAfter.Contains(tokens[i + 1].Lower)))
            return false;

        long total = 0, current = 0;
        var j = i;
        for (; j < tokens.Count; j++)
        {
            var word = tokens[j].Lower;
            if (CardinalWord(word) is { } cardinal) current += cardinal;
            else if (AnchorLexicon.Multipliers.TryGetValue(word, out var multiplier))
            {
                current = Math.Max(current, 1) * multiplier;
                if (multiplier >= 1000) { total += current; current = 0; }
            }
            else if (word == "and" && j > i && j + 1 < tokens.Count && IsNumberWord(tokens[j + 1].Lower)) continue;
            else break;
        }
        consumed = j - i - 1;
        value = (total + current).ToString(CultureInfo.InvariantCulture);
        return true;
    }

    /// <summary>"five-day", "10-trip", "twenty-five-year": a count joined by a hyphen to a word; null for anything else ("twenty-one", "XR-200").</summary>
    static (string Number, string Word)? CountedCompound(string lower)
    {
        var dash = lower.LastIndexOf('-');
        if (dash <= 0 || dash == lower.Length - 1) return null;
        var head = lower[..dash];
        var rest = lower[(dash + 1)..];
        if (!rest.All(char.IsLetter) || CardinalWord(rest) is not null || AnchorLexicon.Ordinals.ContainsKey(rest)) return null;
        if (head.All(char.IsDigit)) return (CanonicalDigits(head)!, rest);
        return CardinalWord(head) is { } n ? (n.ToString(CultureInfo.InvariantCulture), rest) : null;
    }

    static bool IsNumberWord(string lower) => CardinalWord(lower) is not null || AnchorLexicon.Multipliers.ContainsKey(lower);

    /// <summary>The unit of the number ending at token <c>i + consumed</c>: a currency symbol before it, a suffix in the same token, or a unit word or symbol right after it.</summary>
    static string? ReadUnit(string text, List<Token> tokens, int i, ref int consumed)
    {
        if (i > 0 && tokens[i - 1] is { Symbol: true } before && before.Raw.Length == 1
            && AnchorLexicon.CurrencySymbols.TryGetValue(before.Raw[0], out var currency)
            && text.AsSpan(before.End, tokens[i].Start - before.End).IsWhiteSpace())
            return currency;

        if (NumberWithSuffix().Match(tokens[i].Lower) is { Success: true } withSuffix
            && AnchorLexicon.BoundUnits.TryGetValue(withSuffix.Groups[2].Value, out var suffixUnit))
            return suffixUnit;

        var next = i + consumed + 1;
        if (next >= tokens.Count) return null;
        var word = tokens[next].Lower;
        if (word == "per" && next + 1 < tokens.Count && tokens[next + 1].Lower == "cent")
        {
            consumed += 2;
            return "%";
        }
        if (AnchorLexicon.BoundUnits.TryGetValue(word, out var unit)
            || (word.Length == 1 && AnchorLexicon.CurrencySymbols.TryGetValue(word[0], out unit)))
        {
            // "5 kg", "5 %", "20 °C", and "5 €" as written where the symbol follows the amount.
            consumed++;
            return unit;
        }
        return null;
    }

    static string? CanonicalDigits(string digits) =>
        decimal.TryParse(digits.Replace(",", ""), NumberStyles.AllowDecimalPoint, CultureInfo.InvariantCulture, out var number)
            ? Format(number) : null;

    static string Format(decimal number)
    {
        var text = number.ToString(CultureInfo.InvariantCulture);
        return text.Contains('.') ? text.TrimEnd('0').TrimEnd('.') : text;
    }

    static string Ordinal(long n)
    {
        var suffix = (n % 100) is 11 or 12 or 13 ? "th" : (n % 10) switch { 1 => "st", 2 => "nd", 3 => "rd", _ => "th" };
        return n.ToString(CultureInfo.InvariantCulture) + suffix;
    }
}
