using System.Globalization;
using System.Text;

namespace RewriteProxy.Cache;

/// <summary>The normal form of a question for exact lookups: equal normal forms are the same question.</summary>
public static class QuestionText
{
    /// <summary>Unicode NFKC, case-folded, whitespace collapsed to one space, trailing punctuation and spaces trimmed.</summary>
    public static string Normalize(string question)
    {
        var text = question.Normalize(NormalizationForm.FormKC).ToLowerInvariant();
        var sb = new StringBuilder(text.Length);
        var space = false;
        foreach (var c in text)
        {
            if (char.IsWhiteSpace(c))
            {
                space = sb.Length > 0;
                continue;
            }
            if (space) sb.Append(' ');
            space = false;
            sb.Append(c);
        }
        var end = sb.Length;
        while (end > 0 && (char.IsPunctuation(sb[end - 1]) || char.IsWhiteSpace(sb[end - 1])) && !IsClosingBracket(sb[end - 1])) end--;
        return sb.ToString(0, end);
    }

    // A trailing ")" or quote closes content ("... (section 4)"), so it is part of the question.
    static bool IsClosingBracket(char c) => CharUnicodeInfo.GetUnicodeCategory(c) is UnicodeCategory.ClosePunctuation
        or UnicodeCategory.FinalQuotePunctuation || c is '"' or '\'';
}
