using System.Numerics.Tensors;
using RewriteProxy.Embedding;

namespace RewriteProxy.Tests.Embedding;

[Collection(EmbedderCollection.Name)]
public sealed class TokenStatesTests(EmbedderFixture fixture)
{
    /// <summary>Element-wise tolerance between a text's states alone and inside a padded batch (float reordering only).</summary>
    const float SameElement = 1e-4f;

    // Outside source: BERT's uncased basic tokenization (Google's tokenization.py, from memory): lower-case, every
    // non-alphanumeric ASCII character a word of its own; WordPiece then splits words, which stay one word here.
    [Fact]
    public void Words_are_the_basic_tokens_of_uncased_BERT_each_with_a_unit_vector()
    {
        var states = fixture.Embedder.EmbedTokens(["Can't I pay the refuelling charge by e-mail?"])[0];

        Assert.Equal(["can", "'", "t", "i", "pay", "the", "refuelling", "charge", "by", "e", "-", "mail", "?"], states.Words);
        Assert.All(states.Vectors, v =>
        {
            Assert.NotNull(v);
            Assert.Equal(fixture.Embedder.Dimension, v!.Length);
            Assert.InRange(TensorPrimitives.Norm<float>(v), 0.999f, 1.001f);
        });
    }

    [Fact]
    public void A_text_has_the_same_states_alone_and_beside_a_longer_text()
    {
        const string text = "How do I pause my membership?";
        var alone = fixture.Embedder.EmbedTokens([text])[0];
        var batched = fixture.Embedder.EmbedTokens([text, "What happens to my membership fees if I pause my membership for three months in the summer?"])[0];

        Assert.Equal(alone.Words, batched.Words);
        for (var w = 0; w < alone.Words.Count; w++)
            for (var d = 0; d < fixture.Embedder.Dimension; d++)
                Assert.InRange(batched.Vectors[w]![d], alone.Vectors[w]![d] - SameElement, alone.Vectors[w]![d] + SameElement);
    }

    [Fact]
    public void Empty_text_has_no_words()
    {
        var states = fixture.Embedder.EmbedTokens(["", "   "]);

        Assert.All(states, s => Assert.Empty(s.Words));
    }
}
