namespace RewriteProxy.Embedding;

/// <summary>
/// Keeps the vectors of the most recently embedded texts, so that a repeated text runs the model once.
/// Texts compare ordinally (exact characters). Safe for concurrent callers. Owns the inner embedder.
/// </summary>
public sealed class CachingEmbedder : IEmbedder, IDisposable
{
    readonly IEmbedder _inner;
    readonly int _capacity;
    readonly Dictionary<string, LinkedListNode<(string Text, float[] Vector)>> _byText;
    // Most recently used first.
    readonly LinkedList<(string Text, float[] Vector)> _recency = new();
    readonly Lock _gate = new();

    public CachingEmbedder(IEmbedder inner, int capacity)
    {
        ArgumentNullException.ThrowIfNull(inner);
        ArgumentOutOfRangeException.ThrowIfLessThan(capacity, 1);
        _inner = inner;
        _capacity = capacity;
        _byText = new Dictionary<string, LinkedListNode<(string, float[])>>(capacity, StringComparer.Ordinal);
    }

    /// <summary><paramref name="inner"/> behind a cache of <paramref name="cacheSize"/> texts, or <paramref name="inner"/> itself when it is 0.</summary>
    public static IEmbedder Over(IEmbedder inner, int cacheSize) =>
        cacheSize > 0 ? new CachingEmbedder(inner, cacheSize) : inner;

    public string ModelId => _inner.ModelId;

    public int Dimension => _inner.Dimension;

    /// <summary>Texts whose vectors are held now.</summary>
    public int Count
    {
        get { lock (_gate) return _byText.Count; }
    }

    public float[] Embed(string text)
    {
        text ??= "";
        if (TryGet(text) is { } cached)
            return cached;
        float[] vector = _inner.Embed(text);
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

        float[][] fresh = _inner.Embed(missing);
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
        lock (_gate)
        {
            if (!_byText.TryGetValue(text, out var node))
                return null;
            _recency.Remove(node);
            _recency.AddFirst(node);
            return (float[])node.Value.Vector.Clone();
        }
    }

    void Put(string text, float[] vector)
    {
        lock (_gate)
        {
            if (_byText.TryGetValue(text, out var existing))
            {
                _recency.Remove(existing);
                _recency.AddFirst(existing);
                return;
            }
            if (_byText.Count >= _capacity)
            {
                LinkedListNode<(string Text, float[] Vector)> oldest = _recency.Last!;
                _recency.RemoveLast();
                _byText.Remove(oldest.Value.Text);
            }
            _byText[text] = _recency.AddFirst((text, vector));
        }
    }

    public void Dispose() => (_inner as IDisposable)?.Dispose();
}
