using RewriteProxy.Guard;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Guard;

/// <summary>
/// Messy siblings completions as models write them when asked for "up to five short questions, one per line,
/// without numbering" (common practice: they number, bullet, quote, bold and chat anyway). Invented texts.
/// </summary>
public sealed class SiblingParserTests
{
    private const string Q = nameof(CandidateRule.Questions);
    private const string L = nameof(CandidateRule.Lines);

    public static TheoryData<string, string, string, string[]> Completions => new()
    {
        { "clean one per line", Q,
          "When is glass collected?\nIs glass collected weekly?\nHow do I get a calendar?",
          ["When is glass collected?", "Is glass collected weekly?", "How do I get a calendar?"] },
        { "numbered with dots", Q,
          "1. When is glass collected?\n2. Is glass collected weekly?",
          ["When is glass collected?", "Is glass collected weekly?"] },
        { "numbered with parentheses", Q,
          "1) Can I renew online?\n2) Is there a late fee?",
          ["Can I renew online?", "Is there a late fee?"] },
        { "numbers in brackets", Q,
          "(1) Can I renew online?\n(2) Is there a late fee?",
          ["Can I renew online?", "Is there a late fee?"] },
        { "Q labels", Q,
          "Q1: Who decides on cancellations?\nQ2. How am I told?\nQuestion 3: Is a storm warning enough?",
          ["Who decides on cancellations?", "How am I told?", "Is a storm warning enough?"] },
        { "dash and star bullets", Q,
          "- Are flowers allowed?\n* Can I bring balloons?",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "round bullets and en dashes", Q,
          "• Are flowers allowed?\n– Can I bring balloons?\n— Why are plants banned?",
          ["Are flowers allowed?", "Can I bring balloons?", "Why are plants banned?"] },
        { "blank lines between", Q,
          "Are flowers allowed?\n\n\nCan I bring balloons?\n   \n",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "preamble with colon", Q,
          "Here are some related questions:\nAre flowers allowed?\nCan I bring balloons?",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "chatty preamble and closing", Q,
          "Sure! Here are five related questions.\n1. Are flowers allowed?\n2. Can I bring balloons?\nI hope this helps.",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "closing that opens with an auxiliary but is a statement", Q,
          "Are flowers allowed?\nDo let me know if you need more.",
          ["Are flowers allowed?"] },
        { "closing that is itself a question stays a candidate", Q,
          "Are flowers allowed?\nWould you like more questions?",
          ["Are flowers allowed?", "Would you like more questions?"] },
        { "straight quotes", Q,
          "\"Are flowers allowed?\"\n'Can I bring balloons?'",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "curly quotes", Q,
          "“Are flowers allowed?”\n‘Can I bring balloons?’",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "JSON array lines", Q,
          "[\n  \"Are flowers allowed?\",\n  \"Can I bring balloons?\"\n]",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "markdown bold around the line", Q,
          "**Are flowers allowed?**\n__Can I bring balloons?__",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "bold number label", Q,
          "**1.** Are flowers allowed?\n**Q2:** Can I bring balloons?",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "bullet then bold then quotes", Q,
          "- **\"Are flowers allowed?\"**",
          ["Are flowers allowed?"] },
        { "italics around the line", Q,
          "*Are flowers allowed?*",
          ["Are flowers allowed?"] },
        { "trailing spaces and tabs", Q,
          "\tAre flowers allowed?   \n  Can I\tbring  balloons?\t",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "CRLF line ends", Q,
          "Here you go:\r\n1. Are flowers allowed?\r\n2. Can I bring balloons?\r\n",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "lone CR line ends", Q,
          "Are flowers allowed?\rCan I bring balloons?",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "question without question mark", Q,
          "How to renew a parking permit\nWhat documents are needed for enrolment",
          ["How to renew a parking permit", "What documents are needed for enrolment"] },
        { "statement lines are not questions", Q,
          "Parking permits are renewed online.\nThe office opens at nine",
          [] },
        { "numbers that belong to the question stay", Q,
          "3.5 mm tyres, are they allowed?\n2024 rates for permits?\n10:30 visiting slot, is it open?",
          ["3.5 mm tyres, are they allowed?", "2024 rates for permits?", "10:30 visiting slot, is it open?"] },
        { "punctuation-only and code-fence lines", Q,
          "```\n?\n---\nAre flowers allowed?\n```",
          ["Are flowers allowed?"] },
        { "heading ending in colon among bullets", Q,
          "Related questions:\n- Are flowers allowed?\nAbout gifts:\n- Can I bring balloons?",
          ["Are flowers allowed?", "Can I bring balloons?"] },
        { "exact repeats are kept for the guard to count", Q,
          "Are flowers allowed?\n2. Are flowers allowed?",
          ["Are flowers allowed?", "Are flowers allowed?"] },
        { "full-width question mark", Q,
          "Are flowers allowed？",
          ["Are flowers allowed？"] },
        { "curly apostrophe in an opener", Q,
          "What’s the late fee for DVDs",
          ["What’s the late fee for DVDs"] },
        { "empty completion", Q, "", [] },
        { "lines rule keeps statements", L,
          "- renewing a parking permit online\n- parking permit fees 2024\n- resident parking zones",
          ["renewing a parking permit online", "parking permit fees 2024", "resident parking zones"] },
        { "lines rule still drops a colon preamble and blank lines", L,
          "Here are some search queries:\n\n1. parking permit renewal\n2) \"resident zone map\"",
          ["parking permit renewal", "resident zone map"] },
        { "lines rule keeps chatty closing lines", L,
          "parking permit renewal\nI hope this helps.",
          ["parking permit renewal", "I hope this helps."] },
    };

    [Theory]
    [MemberData(nameof(Completions))]
    public void Candidates_are_the_cleaned_lines_the_rule_accepts(string why, string rule, string completion, string[] expected)
    {
        var parsed = SiblingParser.Parse(completion, Enum.Parse<CandidateRule>(rule));
        Assert.True(expected.SequenceEqual(parsed), $"{why}: got [{string.Join(" | ", parsed)}]");
    }

    [Fact]
    public void Questions_rule_keeps_a_subset_of_what_lines_rule_keeps()
    {
        const string completion = "Sure! Here you go:\n1. Are flowers allowed?\n2. Flowers are banned.\nHow to send a card";
        var questions = SiblingParser.Parse(completion, CandidateRule.Questions);
        var lines = SiblingParser.Parse(completion, CandidateRule.Lines);
        Assert.Equal(["Are flowers allowed?", "How to send a card"], questions);
        Assert.Equal(["Are flowers allowed?", "Flowers are banned.", "How to send a card"], lines);
        Assert.All(questions, q => Assert.Contains(q, lines));
    }
}
