using Microsoft.ML.Tokenizers;

namespace RewriteProxy.Embedding;

/// <summary>Text to the word-piece ids a BERT-family model reads: [CLS], pieces, [SEP], truncated to a limit.</summary>
internal sealed class WordPieceEncoder
{
    readonly BertTokenizer _tokenizer;

    WordPieceEncoder(BertTokenizer tokenizer, int maxTokens)
    {
        _tokenizer = tokenizer;
        MaxTokens = maxTokens;
    }

    /// <summary>Word pieces per text, [CLS] and [SEP] included.</summary>
    public int MaxTokens { get; }

    public int PaddingId => _tokenizer.PaddingTokenId;

    /// <summary>Reads a WordPiece vocabulary (one piece a line). Throws <see cref="EmbedderLoadException"/> if it is not one.</summary>
    public static WordPieceEncoder Load(Stream vocabulary, string vocabularyName, int maxTokens)
    {
        // [CLS] and [SEP] take two of the places.
        const int specialTokens = 2;
        if (maxTokens <= specialTokens)
            throw new EmbedderLoadException($"Embedding:MaxTokens is {maxTokens}; it must be more than {specialTokens} ([CLS] and [SEP] are counted).");
        BertTokenizer tokenizer;
        try
        {
            // Basic tokenization is BertTextNormalizer's job (see there why); the tokenizer only splits on spaces and
            // runs WordPiece.
            tokenizer = BertTokenizer.Create(vocabulary, new BertOptions
            {
                ApplyBasicTokenization = false,
                LowerCaseBeforeTokenization = false,
                RemoveNonSpacingMarks = false,
            });
        }
        catch (Exception ex) when (ex is not OutOfMemoryException)
        {
            throw new EmbedderLoadException($"Embedding vocabulary '{vocabularyName}' is not a WordPiece vocabulary: {FirstLine(ex.Message)}", ex);
        }
        return new WordPieceEncoder(tokenizer, maxTokens);
    }

    /// <summary>The ids of one text, or null when the text holds nothing to embed (empty, whitespace, control characters).</summary>
    public IReadOnlyList<int>? Encode(string text)
    {
        if (string.IsNullOrWhiteSpace(text))
            return null;
        string normalized = BertTextNormalizer.Normalize(text);
        if (string.IsNullOrWhiteSpace(normalized))
            return null;
        return _tokenizer.EncodeToIds(normalized, MaxTokens, addSpecialTokens: true, out _, out _);
    }

    /// <summary>How many pieces one word of the normalized text becomes (for <see cref="TokenStates"/>: which pieces are whose).</summary>
    public int PieceCount(string word) => _tokenizer.EncodeToIds(word, addSpecialTokens: false).Count;

    /// <summary>The normalized text and how many of its characters fit in <see cref="MaxTokens"/> (for tests).</summary>
    internal (string Normalized, int CharsConsumed) Truncation(string text)
    {
        string normalized = BertTextNormalizer.Normalize(text);
        _tokenizer.EncodeToIds(normalized, MaxTokens, addSpecialTokens: true, out _, out int consumed);
        return (normalized, consumed);
    }

    internal static string FirstLine(string message)
    {
        int end = message.IndexOfAny(['\r', '\n']);
        return (end < 0 ? message : message[..end]).Trim();
    }
}
