namespace RewriteProxy.Embedding;

/// <summary>Turns texts into L2-normalised sentence vectors, so that cosine similarity is a dot product.</summary>
public interface IEmbedder
{
    /// <summary>Hash of model bytes, vocabulary and pooling: vectors of different ids never meet.</summary>
    string ModelId { get; }

    /// <summary>Length of every vector.</summary>
    int Dimension { get; }

    /// <summary>One text. Empty or whitespace-only text gives the zero vector (cosine 0 to everything).</summary>
    float[] Embed(string text);

    /// <summary>Several texts in one batched model run; the result is in the order of <paramref name="texts"/>.</summary>
    float[][] Embed(IReadOnlyList<string> texts);
}
