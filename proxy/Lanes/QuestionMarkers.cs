using System.Text.RegularExpressions;

namespace RewriteProxy.Lanes;

/// <summary>How the question of a call was found: the word shown in <c>/admin</c>, events and the metric label.</summary>
public static class QuestionSource
{
    /// <summary>The lane's QuestionPattern matched (an explicit override).</summary>
    public const string Pattern = "pattern";
    /// <summary>The lane's learned template matched: the question is its changing span.</summary>
    public const string Template = "template";
    /// <summary>A <c>Question:</c>-style label (also <c>Original question:</c>, <c>Query:</c>, <c>Q:</c>).</summary>
    public const string Label = "label";
    /// <summary>A delimited block: triple quotes, a code fence, <c>&lt;&lt;&lt; &gt;&gt;&gt;</c> or an XML-style tag.</summary>
    public const string Delimiter = "delimiter";
    /// <summary>A quoted question inside one line (straight, curly or guillemet quotes).</summary>
    public const string Quotes = "quotes";
    /// <summary>The last paragraph, when it is the only line that asks something.</summary>
    public const string LastParagraph = "last_paragraph";
    /// <summary>The whole message is one line without a marker: the bare question, as before templates were learned.</summary>
    public const string Message = "message";

    public static readonly IReadOnlyList<string> All = [Pattern, Template, Label, Delimiter, Quotes, LastParagraph, Message];
}

/// <summary>A question span found by a marker, or a best guess.</summary>
/// <param name="Start">Where the span starts in the message.</param>
/// <param name="Length">Its length in characters.</param>
/// <param name="Source">A <see cref="QuestionSource"/> word: which recogniser found it.</param>
/// <param name="Confident">True when the marker leaves no doubt (one label, one delimited block, one quoted question);
/// false for a best guess, which the lane flow treats as unlocated.</param>
public sealed record MarkedQuestion(int Start, int Length, string Source, bool Confident);

/// <summary>
/// Recognises the common ways a prompt marks its question, for calls whose template is not learned yet. The
/// recognisers run in order and the first that finds something decides: a label, a delimited block, a quoted
/// question, the last paragraph. Each says whether it is sure: two labels, or two blocks of which none is named for
/// the question, are ambiguous.
/// </summary>
public static class QuestionMarkers
{
    static readonly TimeSpan RegexBudget = TimeSpan.FromMilliseconds(100);

    // A label at the start of a line, optionally after up to six words ("Original question:", "Here is the user's
    // query:", "Generate search queries for this question:"). Six: the longest lead-in of the prompts read for this
    // (LangChain's MultiQueryRetriever and HyDE prompts, and the in-house templates in the tests) is four words.
    static readonly Regex LabelLine = new(
        @"^[ \t>*_#-]*(?:[\p{L}\p{N}'’]+[ \t]+){0,6}?(?:question|query|q)[ \t]*[:：][ \t]*(?<q>[^\r\n]*)$",
        RegexOptions.Multiline | RegexOptions.IgnoreCase | RegexOptions.CultureInvariant, RegexBudget);

    // Another label line ("Passage:", "Answer:"): where a question that starts on the line after its label ends.
    static readonly Regex AnyLabelLine = new(@"^[ \t]*[\p{L}][\p{L}\p{N} '’]{0,40}[:：][ \t]*$",
        RegexOptions.Multiline | RegexOptions.CultureInvariant, RegexBudget);

    static readonly Regex Blocks = new(
        "\"\"\"(?<q>[\\s\\S]+?)\"\"\"" +
        "|'''(?<q>[\\s\\S]+?)'''" +
        "|```(?<info>[^\\r\\n`]*)\\r?\\n(?<q>[\\s\\S]+?)```" +
        "|<<<(?<q>[\\s\\S]+?)>>>" +
        @"|<(?<tag>[A-Za-z_][\w.-]{0,40})>(?<q>[\s\S]+?)</\k<tag>>",
        RegexOptions.CultureInvariant, RegexBudget);

    static readonly Regex QuotedSpan = new(@"""(?<q>[^""\r\n]{3,})""|“(?<q>[^”\r\n]{3,})”|«\s?(?<q>[^»\r\n]{3,}?)\s?»",
        RegexOptions.CultureInvariant, RegexBudget);

    // Tag and fence names that say the block is the question, not an output example or a document.
    static readonly HashSet<string> QuestionNames = new(StringComparer.OrdinalIgnoreCase)
    {
        "question", "query", "q", "user_question", "user_query", "user-question", "user-query", "input", "original_question",
        "search_query", "text",
    };

    // Words that open an English question; the same list the sibling parser uses for lines without a '?'.
    static readonly HashSet<string> QuestionOpeners = new(StringComparer.OrdinalIgnoreCase)
    {
        "what", "what's", "why", "how", "how's", "when", "where", "where's", "which", "who", "who's", "whom", "whose", "is",
        "isn't", "are", "aren't", "was", "were", "do", "does", "did", "can", "could", "should", "would", "will", "shall",
        "may", "might", "must", "has", "have", "had", "am",
    };

    /// <summary>The question span of <paramref name="text"/> by its markers, or null when no recogniser finds one.</summary>
    public static MarkedQuestion? Find(string text)
    {
        try
        {
            return FindLabel(text) ?? FindBlock(text) ?? FindQuoted(text) ?? FindLastParagraph(text);
        }
        catch (RegexMatchTimeoutException)
        {
            return null;
        }
    }

    static MarkedQuestion? FindLabel(string text)
    {
        var found = new List<(int Start, int Length)>();
        foreach (Match m in LabelLine.Matches(text))
        {
            var q = m.Groups["q"];
            if (q.Length > 0 && q.Value.Trim().Length > 0)
            {
                found.Add(Trimmed(text, q.Index, q.Length));
                continue;
            }
            // "Question:" alone on its line: the question is the lines that follow, up to a blank line or another label.
            var start = m.Index + m.Length;
            while (start < text.Length && text[start] is '\r' or '\n') start++;
            if (start >= text.Length) continue;
            var end = EndOfParagraph(text, start);
            var next = AnyLabelLine.Match(text, start);
            if (next.Success && next.Index < end) end = next.Index;
            if (end > start && text[start..end].Trim().Length > 0) found.Add(Trimmed(text, start, end - start));
        }
        if (found.Count == 0) return null;
        // Several labels (a few-shot prompt with example questions): the last is the live one, but that is a guess.
        var (s, l) = found[^1];
        return new MarkedQuestion(s, l, QuestionSource.Label, found.Count == 1);
    }

    static MarkedQuestion? FindBlock(string text)
    {
        var blocks = new List<(int Start, int Length, bool Named)>();
        foreach (Match m in Blocks.Matches(text))
        {
            var q = m.Groups["q"];
            // Fewer than two words is the instruction naming its delimiters ("between <<< and >>>"), not a question.
            if (Words(q.Value) < 2) continue;
            var name = m.Groups["tag"].Success ? m.Groups["tag"].Value : m.Groups["info"].Value.Trim();
            // A fence or tag named for a format (json, python, questions) holds an example of the output, not the question.
            if (name.Length > 0 && !QuestionNames.Contains(name)) continue;
            var (s, l) = Trimmed(text, q.Index, q.Length);
            blocks.Add((s, l, name.Length > 0));
        }
        if (blocks.Count == 0) return null;
        var named = blocks.Where(b => b.Named).ToList();
        if (named.Count == 1) return new MarkedQuestion(named[0].Start, named[0].Length, QuestionSource.Delimiter, true);
        var last = blocks[^1];
        return new MarkedQuestion(last.Start, last.Length, QuestionSource.Delimiter, blocks.Count == 1);
    }

    static MarkedQuestion? FindQuoted(string text)
    {
        var found = new List<(int Start, int Length)>();
        foreach (Match m in QuotedSpan.Matches(text))
        {
            var q = m.Groups["q"];
            if (!ReadsAsQuestion(q.Value)) continue;
            // The quotes must mark a question inside an instruction, not a phrase inside a question.
            var outside = text.Remove(m.Index, m.Length);
            if (Words(outside) < MinInstructionWords) continue;
            found.Add(Trimmed(text, q.Index, q.Length));
        }
        if (found.Count == 0) return null;
        return new MarkedQuestion(found[^1].Start, found[^1].Length, QuestionSource.Quotes, found.Count == 1);
    }

    /// <summary>
    /// Least words outside a quoted question for the quotes to count as a marker: "Rewrite "…"" has one, an
    /// instruction such as "Write three search queries for "…"" has five. Three leaves room for the short ones.
    /// </summary>
    const int MinInstructionWords = 3;

    static MarkedQuestion? FindLastParagraph(string text)
    {
        var trimmedEnd = text.TrimEnd();
        var gap = LastBlankLine(trimmedEnd);
        if (gap < 0) return null;
        var (s, l) = Trimmed(text, gap, trimmedEnd.Length - gap);
        if (l == 0) return null;
        var paragraph = text.Substring(s, l);
        // Sure only when the last paragraph is one line that asks, and nothing before it asks: otherwise it may be
        // the output instructions after the question ("Return one query per line.").
        var confident = !paragraph.Contains('\n') && ReadsAsQuestion(paragraph) && !text[..s].Contains('?');
        return new MarkedQuestion(s, l, QuestionSource.LastParagraph, confident);
    }

    static int LastBlankLine(string text)
    {
        var m = Regex.Match(text, @"\r?\n[ \t]*\r?\n", RegexOptions.RightToLeft | RegexOptions.CultureInvariant, RegexBudget);
        return m.Success ? m.Index + m.Length : -1;
    }

    static int EndOfParagraph(string text, int start)
    {
        var m = Regex.Match(text[start..], @"\r?\n[ \t]*\r?\n", RegexOptions.CultureInvariant, RegexBudget);
        return m.Success ? start + m.Index : text.TrimEnd().Length;
    }

    /// <summary>Ends in '?' or opens with a question word, and has at least two words.</summary>
    public static bool ReadsAsQuestion(string s)
    {
        var t = s.Trim();
        if (t.Length == 0 || Words(t) < 2) return false;
        if (t[^1] is '?' or '？') return true;
        if (t[^1] is '.' or '!' or ';') return false;
        return QuestionOpeners.Contains(t.Split(' ', 2)[0].Replace('’', '\''));
    }

    static int Words(string s) => s.Split((char[]?)null, StringSplitOptions.RemoveEmptyEntries).Count(w => w.Any(char.IsLetterOrDigit));

    static (int Start, int Length) Trimmed(string text, int start, int length)
    {
        var end = start + length;
        while (start < end && char.IsWhiteSpace(text[start])) start++;
        while (end > start && char.IsWhiteSpace(text[end - 1])) end--;
        return (start, end - start);
    }
}
