using RewriteProxy.Embedding;

namespace RewriteProxy.Tests.Embedding;

public sealed class CachingEmbedderTests
{
    [Fact]
    public void Repeated_text_runs_the_inner_embedder_once()
    {
        var inner = new CountingEmbedder();
        var cache = new CachingEmbedder(inner, capacity: 8);

        float[] first = cache.Embed("How do I renew my library card?");
        float[] second = cache.Embed("How do I renew my library card?");

        Assert.Equal(1, inner.TextsEmbedded);
        Assert.Equal(first, second);
    }

    [Fact]
    public void Least_recently_used_text_is_evicted_first()
    {
        var inner = new CountingEmbedder();
        var cache = new CachingEmbedder(inner, capacity: 2);

        cache.Embed("a");
        cache.Embed("b");
        cache.Embed("a");      // a is now the most recent
        cache.Embed("c");      // evicts b
        int before = inner.TextsEmbedded;
        cache.Embed("a");
        Assert.Equal(before, inner.TextsEmbedded);
        cache.Embed("b");
        Assert.Equal(before + 1, inner.TextsEmbedded);
        Assert.Equal(2, cache.Count);
    }

    [Fact]
    public void Batch_embeds_only_the_texts_not_held_in_one_inner_call()
    {
        var inner = new CountingEmbedder();
        var cache = new CachingEmbedder(inner, capacity: 8);
        cache.Embed("dock");

        float[][] vectors = cache.Embed(["dock", "helmet", "fee"]);

        Assert.Equal(3, inner.TextsEmbedded);
        Assert.Equal(2, inner.BatchCalls);
        Assert.Equal(inner.VectorOf("helmet"), vectors[1]);
        Assert.Equal(inner.VectorOf("dock"), vectors[0]);
    }

    [Fact]
    public void Changing_a_returned_vector_does_not_change_the_cached_one()
    {
        var cache = new CachingEmbedder(new CountingEmbedder(), capacity: 8);
        float[] first = cache.Embed("meter");
        first[0] = 42f;

        Assert.NotEqual(42f, cache.Embed("meter")[0]);
    }

    [Fact]
    public void Cache_size_zero_means_no_cache()
    {
        var inner = new CountingEmbedder();
        Assert.Same(inner, CachingEmbedder.Over(inner, 0));
        Assert.IsType<CachingEmbedder>(CachingEmbedder.Over(inner, 1));
    }

    [Fact]
    public void Concurrent_callers_share_one_consistent_cache()
    {
        var inner = new CountingEmbedder();
        var cache = new CachingEmbedder(inner, capacity: 16);
        string[] texts = Enumerable.Range(0, 10).Select(i => $"question {i}").ToArray();

        Parallel.For(0, 2000, i => Assert.Equal(inner.VectorOf(texts[i % 10]), cache.Embed(texts[i % 10])));

        Assert.Equal(10, cache.Count);
    }

    /// <summary>A stand-in inner embedder that counts what it is asked; its vectors are a fixed function of the text.</summary>
    sealed class CountingEmbedder : IEmbedder
    {
        int _texts;
        int _batches;

        public int TextsEmbedded => Volatile.Read(ref _texts);
        public int BatchCalls => Volatile.Read(ref _batches);
        public string ModelId => "counting";
        public int Dimension => 4;

        public float[] VectorOf(string text) => [text.Length, text.Length > 0 ? text[0] : 0, 1, 2];

        public float[] Embed(string text)
        {
            Interlocked.Increment(ref _texts);
            Interlocked.Increment(ref _batches);
            return VectorOf(text);
        }

        public float[][] Embed(IReadOnlyList<string> list)
        {
            Interlocked.Add(ref _texts, list.Count);
            Interlocked.Increment(ref _batches);
            return list.Select(VectorOf).ToArray();
        }
    }
}
