using System.Text;
using System.Text.RegularExpressions;

namespace RewriteProxy.Cache;

/// <summary>One word, number or symbol of a question, with where it stands.</summary>
internal readonly record struct AnchorToken(int Start, int End, string Raw, bool Symbol, bool SentenceStart)
{
    public string Lower => Raw.ToLowerInvariant();
}

/// <summary>Extraction: a question's text into its <see cref="Anchors"/>, once per question.</summary>
public sealed partial class AnchorGuard
{
    [GeneratedRegex(@"°[CFcf]?|[$€£¥%]|[\p{L}\p{N}](?:[\p{L}\p{N}]|['\-_./](?=[\p{L}\p{N}])|,(?<=\d,)(?=\d{3}(?!\d)))*")]
    private static partial Regex TokenPattern();

    [GeneratedRegex(@"""([^""]+)""|“([^”]+)”|‘([^’]+)’|(?<![\p{L}\p{N}])'(?=\S)([^']*[^\s'])'(?![\p{L}\p{N}])")]
    private static partial Regex QuotePattern();

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

            if (AnchorNumbers.ReadNumber(text, tokens, i, out var value, out var consumed))
            {
                var unit = AnchorNumbers.ReadUnit(text, tokens, i, ref consumed);
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

            if (AnchorNumbers.CountedCompound(lower) is { } counted)
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
                        if (AnchorNumbers.CanonicalDigits(part) is { } number) numbers.Add(number);
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

    static List<AnchorToken> Tokenize(string text)
    {
        var tokens = new List<AnchorToken>();
        var previousEnd = 0;
        foreach (Match match in TokenPattern().Matches(text))
        {
            var gap = text.AsSpan(previousEnd, match.Index - previousEnd);
            var sentenceStart = tokens.Count == 0 || gap.IndexOfAny(".?!:;\n\"“(") >= 0;
            var symbol = !char.IsLetterOrDigit(match.Value[0]);
            tokens.Add(new AnchorToken(match.Index, match.Index + match.Length, match.Value, symbol, sentenceStart));
            previousEnd = match.Index + match.Length;
        }
        return tokens;
    }

    static bool IsShouted(List<AnchorToken> tokens)
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

    void ReadWord(AnchorToken token, string lower, bool shouted, bool mayNegate, ref int negations,
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
}
