using System.Numerics.Tensors;

namespace RewriteProxy.Embedding;

/// <summary>Similarity of embedding vectors.</summary>
public static class VectorMath
{
    /// <summary>Sum of element products. For the L2-normalised vectors of an <see cref="IEmbedder"/> this is the cosine.</summary>
    public static float Dot(ReadOnlySpan<float> a, ReadOnlySpan<float> b)
    {
        if (a.Length != b.Length)
            throw new ArgumentException($"Vectors differ in length ({a.Length} and {b.Length}).", nameof(b));
        return TensorPrimitives.Dot(a, b);
    }

    /// <summary>
    /// Cosine similarity of any two vectors of equal length. A zero vector (the embedding of empty text) has
    /// cosine 0 to everything, itself included, rather than NaN.
    /// </summary>
    public static float Cosine(ReadOnlySpan<float> a, ReadOnlySpan<float> b)
    {
        if (a.Length != b.Length)
            throw new ArgumentException($"Vectors differ in length ({a.Length} and {b.Length}).", nameof(b));
        float normA = TensorPrimitives.Norm(a);
        float normB = TensorPrimitives.Norm(b);
        if (normA == 0f || normB == 0f)
            return 0f;
        return TensorPrimitives.Dot(a, b) / (normA * normB);
    }
}
