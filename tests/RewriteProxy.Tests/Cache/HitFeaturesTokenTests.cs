using RewriteProxy.Cache;
using RewriteProxy.Tests.Embedding;

namespace RewriteProxy.Tests.Cache;

[Collection(EmbedderCollection.Name)]
public sealed class HitFeaturesTokenTests(EmbedderFixture fixture)
{
    const double Same = 1e-5;

    // Outside source: BERTScore (Zhang et al., ICLR 2020), whose precision, recall and F1 of a sentence against itself are 1.
    [Fact]
    public void A_question_against_itself_scores_one_and_has_no_unexplained_word()
    {
        const string question = "How do I pause my membership from the app?";
        var x = Signals(question, question);

        Assert.All(x[..5], v => Assert.InRange(v, 1 - Same, 1 + Same));
        Assert.Equal(0, x[5]);
    }

    [Fact]
    public void Every_unexplained_content_word_is_matched_against_the_other_question()
    {
        var x = Signals("How do I pause my membership?", "How do I freeze my membership?");

        Assert.True(x[3] is > 0 and < 1, $"best match {x[3]}: pause and freeze are no WordNet synonyms, so each is matched by cosine");
        // Each is the other's best counterpart (the rest of the two questions is the same), so both best matches are one cosine.
        Assert.Equal(x[3], x[4], 6);
        Assert.True(x[0] < 1, $"token F1 {x[0]} for two different questions");
    }

    double[] Signals(string asked, string cached)
    {
        var decision = new HitDecision(new AnchorGuard());
        var (a, c) = (decision.Read(asked), decision.Read(cached));
        var states = fixture.Embedder.EmbedTokens([asked, cached]);
        var (_, _, diff) = decision.Examine(a, c, 0.9);
        return HitFeatures.OfTokens(a, c, diff!, states[0], states[1]);
    }
}
