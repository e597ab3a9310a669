using RewriteProxy.Lanes;

namespace RewriteProxy.Tests.Lanes;

public sealed class QuestionMarkersTests
{
    static (string Question, string Source, bool Confident) Locate(string text)
    {
        var found = QuestionLocator.LocateWithoutTemplate(text);
        return (text.Substring(found.Start, found.Length), found.Source, found.Confident);
    }

    [Fact]
    public void MultiQueryRetriever_default_prompt_is_read_by_its_label_not_by_the_example_tags()
    {
        var q = PromptShapes.Questions[0];
        Assert.Equal((q, QuestionSource.Label, true), Locate(PromptShapes.MultiQuery(q)));
    }

    [Fact]
    public void Hyde_prompt_is_read_by_its_label_and_stops_before_the_passage_cue()
    {
        var q = PromptShapes.Questions[1];
        Assert.Equal((q, QuestionSource.Label, true), Locate(PromptShapes.Hyde(q)));
    }

    [Fact]
    public void A_label_on_its_own_line_takes_the_lines_after_it_up_to_the_next_label()
    {
        var text = "Rewrite the question for search.\nQuestion:\nWhen does the pool open\non public holidays?\nRewrite:";
        Assert.Equal(("When does the pool open\non public holidays?", QuestionSource.Label, true), Locate(text));
    }

    [Fact]
    public void Triple_quotes_and_angle_delimiters_mark_the_question_without_a_label()
    {
        var q = PromptShapes.Questions[2];
        Assert.Equal((q, QuestionSource.Delimiter, true), Locate(PromptShapes.TripleQuoted(q)));
        Assert.Equal((q, QuestionSource.Delimiter, true), Locate(PromptShapes.Angled(q)));
    }

    [Fact]
    public void An_xml_style_tag_named_for_the_question_wins_over_an_output_example()
    {
        var text = "Give related questions inside <queries></queries>, e.g. <queries>\nfirst\nsecond\n</queries>\n<question>Is the ferry running tomorrow?</question>";
        Assert.Equal(("Is the ferry running tomorrow?", QuestionSource.Delimiter, true), Locate(text));
    }

    [Fact]
    public void A_code_fence_without_a_language_marks_the_question()
    {
        var text = "Turn the user's message into search queries.\n```\nWhere can I park a camper van overnight?\n```";
        Assert.Equal(("Where can I park a camper van overnight?", QuestionSource.Delimiter, true), Locate(text));
    }

    [Fact]
    public void A_quoted_question_inside_an_instruction_is_the_question()
    {
        var text = "Generate three search queries related to \"How do I appeal a parking fine?\" for our knowledge base.";
        Assert.Equal(("How do I appeal a parking fine?", QuestionSource.Quotes, true), Locate(text));
    }

    [Fact]
    public void A_quoted_phrase_inside_a_bare_question_is_not_a_marker()
    {
        var text = "What does \"net metering\" mean on my bill?";
        Assert.Equal((text, QuestionSource.Message, true), Locate(text));
    }

    [Fact]
    public void The_last_paragraph_is_sure_only_when_it_is_the_one_line_that_asks()
    {
        var asks = "Our customers write about bike rentals.\n\nHow late can I return an e-bike?";
        Assert.Equal(("How late can I return an e-bike?", QuestionSource.LastParagraph, true), Locate(asks));

        var instructionsLast = PromptShapes.Unmarked("How late can I return an e-bike?");
        var (_, source, confident) = Locate(instructionsLast);
        Assert.Equal(QuestionSource.LastParagraph, source);
        Assert.False(confident);
    }

    [Fact]
    public void Two_labels_are_a_guess_at_the_last_one()
    {
        var fewShot = "Question: Is parking free on Sundays?\nQueries: Sunday parking fees\n\nQuestion: Do trams run at night?\nQueries:";
        Assert.Equal(("Do trams run at night?", QuestionSource.Label, false), Locate(fewShot));
    }

    [Theory]
    [InlineData("What happens if I return a bike to a full docking station?")]
    [InlineData("visiting hours maternity ward")]
    [InlineData("Is the 2024 water rate higher than the 2023 one?")]
    public void A_bare_one_line_question_is_the_whole_message_and_sure(string question)
    {
        Assert.Equal((question, QuestionSource.Message, true), Locate(question));
        Assert.Equal((question, QuestionSource.Message, true), Locate("  " + question + "\n"));
    }

    [Fact]
    public void Several_lines_without_any_marker_are_not_located_with_confidence()
    {
        var (_, _, confident) = Locate("Tell me about the library.\nI want to know the opening times and fines.");
        Assert.False(confident);
    }
}
