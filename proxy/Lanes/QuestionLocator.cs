namespace RewriteProxy.Lanes;

/// <summary>Where the question is in the last user message, how it was found, and whether the lane may trust it.</summary>
/// <param name="Start">Where the question starts in the message.</param>
/// <param name="Length">Its length in characters.</param>
/// <param name="Source">A <see cref="QuestionSource"/> word.</param>
/// <param name="Confident">"Located with confidence": the lane flow may look up semantically and enforce the drift
/// guard. When false the span is a best guess, used only to measure drift.</param>
/// <param name="Template">The learned template that matched, when <paramref name="Source"/> is <c>template</c>.</param>
public sealed record LocatedQuestion(int Start, int Length, string Source, bool Confident, LearnedTemplate? Template = null);

/// <summary>
/// Finds the question in a templated message with no configuration, in this order: the lane's learned template (and
/// learning one from this message and earlier ones); the common markers (<see cref="QuestionMarkers"/>); a message of
/// one line is the bare question itself. Anything else is a best guess and not confident.
/// </summary>
/// <remarks>
/// The confidence rule: a call is located with confidence when its span comes from a learned template, from one
/// unambiguous marker (one label, one delimited block or one named for the question, one quoted question, a last
/// paragraph that is the only line asking something), or when the whole message is one line without any marker
/// (bare-question traffic, treated exactly as before). QuestionPattern is handled before this and is always trusted.
/// </remarks>
public static class QuestionLocator
{
    public static LocatedQuestion Locate(string text, string lane, string learningKey, string partition, TemplateLearner learner)
    {
        if (learner.Locate(lane, learningKey, partition, text) is { } t)
            return new LocatedQuestion(t.Start, t.Length, QuestionSource.Template, true, t.Template);
        return LocateWithoutTemplate(text);
    }

    /// <summary>The markers, then the bare-question rule: what is known before a template is learned.</summary>
    public static LocatedQuestion LocateWithoutTemplate(string text)
    {
        var marked = QuestionMarkers.Find(text);
        if (marked is { Confident: true }) return new LocatedQuestion(marked.Start, marked.Length, marked.Source, true);

        var (start, length) = Trim(text);
        // One line and no sure marker: the bare question, as the lane has always read it.
        if (marked is null && !text.AsSpan(start, length).ContainsAny('\n', '\r'))
            return new LocatedQuestion(start, length, QuestionSource.Message, true);
        return marked is not null
            ? new LocatedQuestion(marked.Start, marked.Length, marked.Source, false)
            : new LocatedQuestion(start, length, QuestionSource.Message, false);
    }

    static (int Start, int Length) Trim(string text)
    {
        int start = 0, end = text.Length;
        while (start < end && char.IsWhiteSpace(text[start])) start++;
        while (end > start && char.IsWhiteSpace(text[end - 1])) end--;
        return (start, end - start);
    }
}
