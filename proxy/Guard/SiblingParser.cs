using System.Text;
using System.Text.RegularExpressions;

namespace RewriteProxy.Guard;

/// <summary>
/// Splits a siblings completion into candidate lines. The prompt usually asks for short questions, one per
/// line, without numbering; models disobey, so the parser cleans each line before it decides.
/// </summary>
/// <remarks>
/// <para>Each line (split on CRLF, LF or CR) is cleaned, in this order, repeating until nothing changes:
/// surrounding white space (tabs and no-break spaces included) is trimmed; markdown emphasis wrapping the
/// line (<c>__…__</c>, <c>*…*</c>, <c>_…_</c>) and every <c>**</c> are removed; one list marker is removed — a
/// bullet (<c>- * • – — + ·</c>), a number (<c>1.</c> <c>1)</c> <c>(1)</c> <c>1:</c>), or a question label
/// (<c>Q1:</c> <c>Q1.</c> <c>Question 1:</c>); a pair of surrounding quotes (straight, curly, guillemets or
/// backticks) is removed, also when a trailing comma follows it, as in a JSON array. Finally runs of white
/// space become one space. A number is a list marker only with one or two digits not followed by another
/// digit, so "3.5 mm jacks?" and "2024 rates?" keep their numbers.</para>
/// <para>A cleaned line must contain a letter or digit. A line ending in ':' introduces something
/// ("Here are some related questions:") and is never a candidate under either rule.</para>
/// <para><see cref="CandidateRule.Questions"/>: the line ends in '?' (or the full-width '？'); or it has no final
/// punctuation at all and its first word is a question word or an auxiliary verb ("How to renew a permit").
/// A line that ends in '.', '!' or ';' is a statement even when it opens with such a word ("Do let me know
/// if you need more.").</para>
/// <para><see cref="CandidateRule.Lines"/>: every other cleaned line, statements included.</para>
/// <para>A closing line that is itself a question ("Would you like more?") is a candidate; such closers
/// drifted at least 0.74 from the labelled questions (docs/measurements/drift-defaults.md), so the guard drops them for drift. Exact repeats are kept: the guard drops them as duplicates, so they are counted.</para>
/// </remarks>
public static class SiblingParser
{
    // Words that open an English question (common practice: wh-words plus the auxiliaries of yes/no questions).
    private static readonly HashSet<string> QuestionOpeners = new(StringComparer.OrdinalIgnoreCase)
    {
        "what", "what's", "whats", "why", "how", "how's", "when", "where", "where's", "which", "who", "who's",
        "whom", "whose", "is", "isn't", "are", "aren't", "was", "wasn't", "were", "do", "don't", "does", "doesn't",
        "did", "didn't", "can", "can't", "could", "couldn't", "should", "shouldn't", "would", "wouldn't", "will",
        "won't", "shall", "may", "might", "must", "has", "hasn't", "have", "haven't", "had", "am",
    };

    private static readonly Regex Marker = new(
        @"^(?:[-*•–—+·▪◦‣]\s*(?!\*)|\(\d{1,2}\)\s*|\d{1,2}[.):](?!\d)\s*|(?:Q|Question\s*)\d{1,2}\s*[.):](?!\d)\s*)",
        RegexOptions.CultureInvariant | RegexOptions.IgnoreCase);

    private static readonly (char Open, char Close)[] QuotePairs =
    [
        ('"', '"'), ('\'', '\''), ('“', '”'), ('‘', '’'), ('„', '“'), ('«', '»'), ('`', '`'), ('”', '”'),
    ];

    /// <summary>Candidate lines of <paramref name="completion"/> under <paramref name="rule"/>, cleaned, in their order.</summary>
    public static IReadOnlyList<string> Parse(string completion, CandidateRule rule)
    {
        var found = new List<string>();
        foreach (var raw in completion.Split(["\r\n", "\n", "\r"], StringSplitOptions.None))
        {
            var line = Clean(raw);
            if (IsCandidate(line, rule)) found.Add(line);
        }
        return found;
    }

    /// <summary>One line with markers, emphasis and quotes removed (see the type's remarks).</summary>
    internal static string Clean(string raw)
    {
        var line = raw;
        string before;
        do
        {
            before = line;
            line = StripEmphasis(TrimSpace(line));
            line = Marker.Replace(TrimSpace(line), "", 1);
            line = StripQuotes(TrimSpace(line));
        }
        while (line != before);
        return CollapseSpace(line);
    }

    private static bool IsCandidate(string line, CandidateRule rule)
    {
        if (!line.Any(char.IsLetterOrDigit)) return false;
        var last = line[^1];
        if (last == ':') return false;
        if (rule == CandidateRule.Lines) return true;
        if (last is '?' or '？') return true;
        if (last is '.' or '!' or ';' or '…') return false;
        var firstWord = line.Split(' ', 2)[0].TrimEnd(',').Replace('’', '\'');
        return QuestionOpeners.Contains(firstWord);
    }

    private static string StripEmphasis(string line)
    {
        if (line.Length >= 4 && (line.StartsWith("__") && line.EndsWith("__")))
            line = line[2..^2];
        line = line.Replace("**", "");
        // A single '*' or '_' around the whole line is italics; a lone leading '*' was taken as a bullet.
        if (line.Length >= 2 && ((line[0] == '*' && line[^1] == '*') || (line[0] == '_' && line[^1] == '_')))
            line = line[1..^1];
        return line;
    }

    private static string StripQuotes(string line)
    {
        var body = line.EndsWith(',') ? line[..^1].TrimEnd() : line;
        if (body.Length < 2) return line;
        foreach (var (open, close) in QuotePairs)
            if (body[0] == open && body[^1] == close)
                return body[1..^1];
        return line;
    }

    private static string TrimSpace(string s) => s.Trim().Trim('\u00A0', '\u200B', '\uFEFF').Trim();

    private static string CollapseSpace(string s)
    {
        var sb = new StringBuilder(s.Length);
        var space = false;
        foreach (var ch in s)
        {
            if (char.IsWhiteSpace(ch)) { space = true; continue; }
            if (space && sb.Length > 0) sb.Append(' ');
            space = false;
            sb.Append(ch);
        }
        return sb.ToString();
    }
}
