namespace RewriteProxy.Embedding;

/// <summary>
/// The model's contextual state of each word of one text, before pooling: what BERTScore (Zhang et al., ICLR 2020) matches
/// between two texts to tell which words of one have a counterpart in the other. <see cref="Words"/> are the basic tokens of
/// the normalised text (<see cref="BertTextNormalizer"/>: lower-case, no accents, each punctuation mark a word of its own);
/// a word's vector is the mean of its word pieces' last hidden states, L2-normalised so that cosine is a dot product
/// (BERTScore matches pieces; a word of several pieces is one vector here so that it can stand beside the hit decision's
/// words). A word whose pieces were cut off at MaxTokens has no vector.
/// </summary>
public sealed record TokenStates(IReadOnlyList<string> Words, IReadOnlyList<float[]?> Vectors)
{
    /// <summary>An empty or whitespace-only text.</summary>
    public static readonly TokenStates Empty = new([], []);
}

/// <summary>An embedder that can also give the per-word states its sentence vectors are pooled from.</summary>
public interface ITokenEmbedder
{
    /// <summary>The states of each text's words, one model run for all of them, in the order of <paramref name="texts"/>.</summary>
    TokenStates[] EmbedTokens(IReadOnlyList<string> texts);
}
