namespace RewriteProxy.Embedding;

/// <summary>
/// Keeps the vectors of the most recently embedded texts, so that a repeated text runs the model once.
/// Texts compare ordinally (exact characters). Safe for concurrent callers. Owns the inner embedder.
/// </summary>
public sealed class CachingEmbedder : IEmbedder, IDisposable
{
    readonly IEmbedder inner;
    readonly int capacity;
    readonly Dictionary<string, LinkedListNode<(string Text, float[] Vector)>> byText;
    // Most recently used first.
    readonly LinkedList<(string Text, float[] Vector)> recency = new();
    readonly Lock gate = new();

    public CachingEmbedder(IEmbedder inner, int capacity)
    {
        ArgumentNullException.ThrowIfNull(inner);
        ArgumentOutOfRangeException.ThrowIfLessThan(capacity, 1);
        this.inner = inner;
        this.capacity = capacity;
        byText = new Dictionary<string, LinkedListNode<(string, float[])>>(capacity, StringComparer.Ordinal);
    }

    /// <summary><paramref name="inner"/> behind a cache of <paramref name="cacheSize"/> texts, or <paramref name="inner"/> itself when it is 0.</summary>
    public static IEmbedder Over(IEmbedder inner, int cacheSize) =>
        cacheSize > 0 ? new CachingEmbedder(inner, cacheSize) : inner;

    public string ModelId => inner.ModelId;

    public int Dimension => inner.Dimension;

    /// <summary>Texts whose vectors are held now.</summary>
    public int Count
    {
        get { lock (gate) return byText.Count; }
    }

    public float[] Embed(string text)
    {
        text ??= "";
        if (TryGet(text) is { } cached)
            return cached;
        float[] vector = inner.Embed(text);
        Put(text, vector);
        return (float[])vector.Clone();
    }

    public float[][] Embed(IReadOnlyList<string> texts)
    {
        ArgumentNullException.ThrowIfNull(texts);
        var vectors = new float[texts.Count][];
        List<string>? missing = null;
        List<int>? missingAt = null;
        for (int i = 0; i < texts.Count; i++)
        {
            string text = texts[i] ?? "";
            if (TryGet(text) is { } cached)
            {
                vectors[i] = cached;
                continue;
            }
            (missing ??= []).Add(text);
            (missingAt ??= []).Add(i);
        }
        if (missing is null)
            return vectors;

        float[][] fresh = inner.Embed(missing);
        for (int m = 0; m < fresh.Length; m++)
        {
            Put(missing[m], fresh[m]);
            vectors[missingAt![m]] = (float[])fresh[m].Clone();
        }
        return vectors;
    }

    /// <summary>A copy, so that a caller who writes into its vector does not change the cached one.</summary>
    float[]? TryGet(string text)
    {
        lock (gate)
        {
            if (!byText.TryGetValue(text, out var node))
                return null;
            recency.Remove(node);
            recency.AddFirst(node);
            return (float[])node.Value.Vector.Clone();
        }
    }

    void Put(string text, float[] vector)
    {
        lock (gate)
        {
            if (byText.TryGetValue(text, out var existing))
            {
                recency.Remove(existing);
                recency.AddFirst(existing);
                return;
            }
            if (byText.Count >= capacity)
            {
                LinkedListNode<(string Text, float[] Vector)> oldest = recency.Last!;
                recency.RemoveLast();
                byText.Remove(oldest.Value.Text);
            }
            byText[text] = recency.AddFirst((text, vector));
        }
    }

    public void Dispose() => (inner as IDisposable)?.Dispose();
}
