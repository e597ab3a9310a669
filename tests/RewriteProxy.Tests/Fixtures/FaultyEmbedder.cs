using RewriteProxy.Embedding;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>The real model, made to throw on demand the way a broken ONNX session does.</summary>
public sealed class FaultyEmbedder(IEmbedder inner) : IEmbedder
{
    public enum Mode { Never, Always, Rewrites }
    public volatile Mode Fail;
    public string Question = "";

    public string ModelId => inner.ModelId;
    public int Dimension => inner.Dimension;
    public float[] Embed(string text) => Embed([text])[0];

    public float[][] Embed(IReadOnlyList<string> texts)
    {
        if (Fail == Mode.Always || (Fail == Mode.Rewrites && texts.Any(t => t != Question)))
            throw new InvalidOperationException("the embedding session broke");
        return inner.Embed(texts);
    }
}
