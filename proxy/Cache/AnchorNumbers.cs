using System.Globalization;
using System.Text.RegularExpressions;

namespace RewriteProxy.Cache;

/// <summary>
/// Numbers and units of a question as the anchor guard compares them: digits, decimals, versions, ordinals, written-out
/// numbers with their multipliers, and the unit or currency beside a number, each in one canonical spelling.
/// </summary>
internal static partial class AnchorNumbers
{
    [GeneratedRegex(@"^(?:\d{1,3}(?:,\d{3})+|\d+)(?:\.\d+)?$")]
    private static partial Regex PlainNumber();

    [GeneratedRegex(@"^v?(\d+(?:\.\d+){2,})$|^v(\d+(?:\.\d+)?)$")]
    private static partial Regex VersionNumber();

    [GeneratedRegex(@"^(\d+)(?:st|nd|rd|th)$")]
    private static partial Regex DigitOrdinal();

    [GeneratedRegex(@"^((?:\d{1,3}(?:,\d{3})+|\d+)(?:\.\d+)?)([a-z°%][a-z°%/.]*)$")]
    private static partial Regex NumberWithSuffix();

    /// <summary>
    /// A number at token <paramref name="i"/>: digits, a version, an ordinal, or a run of number words. Sets
    /// <paramref name="consumed"/> to how many tokens after <paramref name="i"/> belong to it.
    /// </summary>
    internal static bool ReadNumber(string text, List<AnchorToken> tokens, int i, out string value, out int consumed)
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

    static string Sign(string text, AnchorToken token) =>
        token.Start >= 1 && text[token.Start - 1] == '-' && (token.Start == 1 || char.IsWhiteSpace(text[token.Start - 2]) || text[token.Start - 2] == '(')
            ? "-" : "";

    static decimal ReadMultipliers(List<AnchorToken> tokens, int i, ref int consumed)
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
    static bool ReadNumberWords(List<AnchorToken> tokens, int i, out string value, out int consumed)
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
    internal static (string Number, string Word)? CountedCompound(string lower)
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
    internal static string? ReadUnit(string text, List<AnchorToken> tokens, int i, ref int consumed)
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

    internal static string? CanonicalDigits(string digits) =>
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
