using RewriteProxy.Lanes;

namespace RewriteProxy.Tests.Lanes;

public sealed class TemplateLearnerTests
{
    const string Key = "scope-without-question";

    /// <summary>Feeds questions through a template until the learner locates one by template; returns how many calls it took.</summary>
    static int CallsToLearn(TemplateLearner learner, Func<string, string> template, IEnumerable<string> questions)
    {
        var calls = 0;
        foreach (var q in questions)
        {
            calls++;
            var text = template(q);
            if (learner.Locate("siblings", Key, "p", text) is { } found)
            {
                Assert.Equal(q, text.Substring(found.Start, found.Length));
                return calls;
            }
        }
        return -1;
    }

    [Fact]
    public void An_unmarked_in_house_template_is_learned_from_the_third_distinct_call()
    {
        var learner = new TemplateLearner();
        Assert.Equal(TemplateLearner.MinDistinctCalls, CallsToLearn(learner, PromptShapes.Unmarked, PromptShapes.Questions));

        var (template, _) = Assert.Single(learner.Snapshot());
        Assert.Equal("We run a help centre for a regional transit operator.\n\n", template.Prefix);
        Assert.Equal("\n\nList related questions a rider might also ask, one per line.", template.Suffix);
        Assert.Equal(3, template.LearnedFrom);
    }

    [Theory]
    [InlineData("multiquery")]
    [InlineData("hyde")]
    [InlineData("triple")]
    [InlineData("angled")]
    public void Every_known_prompt_shape_is_learned_with_the_question_as_its_changing_span(string shape)
    {
        Func<string, string> template = shape switch
        {
            "multiquery" => PromptShapes.MultiQuery,
            "hyde" => PromptShapes.Hyde,
            "triple" => PromptShapes.TripleQuoted,
            _ => PromptShapes.Angled,
        };
        var learner = new TemplateLearner();
        Assert.Equal(3, CallsToLearn(learner, template, PromptShapes.Questions));
        // Once learned, every later question is located by the template.
        foreach (var q in PromptShapes.Questions.Skip(3))
        {
            var found = learner.Locate("siblings", Key, "p", template(q))!.Value;
            Assert.Equal(q, template(q).Substring(found.Start, found.Length));
        }
    }

    [Fact]
    public void Questions_that_start_alike_are_not_a_template()
    {
        var learner = new TemplateLearner();
        string[] bare =
        [
            "What is the refund policy for annual passes?",
            "What is the refund policy for day tickets?",
            "What is the refund policy for group bookings?",
            "What is the refund policy for cancelled tours?",
            "What is the refund policy for lost cards?",
        ];
        Assert.Equal(-1, CallsToLearn(learner, q => q, bare));
        Assert.Empty(learner.Snapshot());
    }

    [Fact]
    public void A_short_shared_label_in_bare_questions_is_not_a_template()
    {
        var learner = new TemplateLearner();
        string[] bare = ["Billing: why was I charged twice?", "Billing: when is my bill due?", "Billing: can I pay by card?", "Billing: where is my invoice?"];
        Assert.Equal(-1, CallsToLearn(learner, q => q, bare));
    }

    [Fact]
    public void A_one_line_template_is_learned_when_a_delimiter_ends_it_and_not_when_plain_words_do()
    {
        Assert.Equal(3, CallsToLearn(new TemplateLearner(), q => $"Rephrase this for search: {q}", PromptShapes.Questions));
        Assert.Equal(-1, CallsToLearn(new TemplateLearner(), q => $"Rephrase this for search {q}", PromptShapes.Questions));
    }

    [Fact]
    public void A_repeated_question_counts_once_toward_learning()
    {
        var learner = new TemplateLearner();
        var text = PromptShapes.Unmarked(PromptShapes.Questions[0]);
        for (var i = 0; i < 5; i++) Assert.Null(learner.Locate("siblings", Key, "p", text));
        Assert.Empty(learner.Snapshot());
    }

    [Fact]
    public void Common_words_at_the_start_of_the_questions_stay_in_the_question()
    {
        var learner = new TemplateLearner();
        string[] questions = ["How do I renew a permit?", "How do I cancel a permit?", "How do I transfer a permit?"];
        Assert.Equal(3, CallsToLearn(learner, q => $"Rewrite for our search index.\nQuestion: {q}\nRewrite:", questions));
        var (template, _) = Assert.Single(learner.Snapshot());
        Assert.Equal("Rewrite for our search index.\nQuestion: ", template.Prefix);
        Assert.Equal("\nRewrite:", template.Suffix);
    }

    [Fact]
    public void Templates_are_kept_per_key_and_a_second_shape_in_one_key_is_learned_beside_the_first()
    {
        var learner = new TemplateLearner();
        Assert.Equal(3, CallsToLearn(learner, PromptShapes.Hyde, PromptShapes.Questions));
        Assert.Null(learner.Locate("siblings", "another-key", "p", PromptShapes.Hyde(PromptShapes.Questions[4])));
        Assert.Equal(3, CallsToLearn(learner, PromptShapes.Unmarked, PromptShapes.Questions));
        Assert.Equal(2, learner.Snapshot().Count);
    }

    [Fact]
    public void A_question_repeated_further_down_is_a_second_changing_span_and_is_not_learned()
    {
        var learner = new TemplateLearner();
        Assert.Equal(-1, CallsToLearn(learner,
            q => $"Find documents for this.\n\n{q}\n\nRemember: the rewrites must stay about the same topic.\nTopic: {q}",
            PromptShapes.Questions));
    }

    [Fact]
    public void Templates_loaded_from_the_store_locate_at_once()
    {
        var learner = new TemplateLearner();
        learner.Load([new LearnedTemplate("draft", Key, "p", "Please write a passage to answer the question\nQuestion: ", "\nPassage:", 3, DateTimeOffset.UtcNow)]);
        var text = PromptShapes.Hyde(PromptShapes.Questions[3]);
        var found = learner.Locate("draft", Key, "p", text)!.Value;
        Assert.Equal(PromptShapes.Questions[3], text.Substring(found.Start, found.Length));
    }

    [Fact]
    public void A_learned_template_is_handed_over_to_be_persisted()
    {
        var learner = new TemplateLearner();
        var persisted = new List<LearnedTemplate>();
        learner.Learned = persisted.Add;
        CallsToLearn(learner, PromptShapes.TripleQuoted, PromptShapes.Questions);
        Assert.Single(persisted);
        Assert.Equal("siblings", persisted[0].Lane);
    }
}
