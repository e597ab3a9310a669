using System.Collections.Concurrent;
using System.Numerics.Tensors;
using RewriteProxy.Cache;

namespace RewriteProxy.Tests.Cache;

public class VectorIndexTests
{
    /// <summary>The width of all-MiniLM-L6-v2, the shipped model.</summary>
    private const int Dims = 384;
    private const string WaterScope = "draft|water-utility-model|fp-leak-reports|t0|partition-a";
    private const string BikeScope = "siblings|bike-share-model|fp-handbook|t0|partition-b";

    /// <summary>Project target for the graph (issue 4): recall@1 against brute force of at least 0.99.</summary>
    private const double RecallTarget = 0.99;

    /// <summary>Float32 dot products summed in a different order differ in the last bits; 1e-5 is far below any
    /// similarity threshold we configure (common practice for float32 comparisons).</summary>
    private const float SimilarityTolerance = 1e-5f;

    /// <summary>Small switch size so tests reach the graph with few entries.</summary>
    private const int TestSwitchSize = 200;

    [Fact]
    public void Exact_search_equals_a_brute_force_cosine_reference()
    {
        var rows = VectorIndexTestData.Units(800, Dims, seed: 1);
        using var index = new VectorIndex(Dims, switchSize: 10_000);
        for (var i = 0; i < rows.Length; i++) index.Add(WaterScope, i, rows[i]);
        var random = new Random(2);

        for (var q = 0; q < 25; q++)
        {
            var query = VectorIndexTestData.Unit(random, Dims);
            const int k = 5;
            // Reference: System.Numerics.Tensors.TensorPrimitives.CosineSimilarity over every stored vector.
            var expected = rows.Select((v, i) => (Id: (long)i, Similarity: TensorPrimitives.CosineSimilarity(v, query)))
                .OrderByDescending(p => p.Similarity).Take(k).ToArray();

            var actual = index.Search(WaterScope, query, k, minSimilarity: -1f);

            Assert.Equal(expected.Select(e => e.Id), actual.Select(a => a.Id));
            for (var i = 0; i < k; i++) Assert.Equal(expected[i].Similarity, actual[i].Similarity, SimilarityTolerance);
        }
    }

    [Theory]
    [InlineData(10_000)]
    [InlineData(TestSwitchSize)]
    public void Scopes_never_mix_even_with_identical_vectors(int switchSize)
    {
        var rows = VectorIndexTestData.Units(300, Dims, seed: 3);
        using var index = new VectorIndex(Dims, switchSize);
        for (var i = 0; i < rows.Length; i++)
        {
            index.Add(WaterScope, i, rows[i]);
            index.Add(BikeScope, 10_000 + i, rows[i]);
        }

        foreach (var query in rows.Take(50))
        {
            var water = index.Search(WaterScope, query, 4, 0f);
            var bike = index.Search(BikeScope, query, 4, 0f);
            Assert.NotEmpty(water);
            Assert.All(water, r => Assert.InRange(r.Id, 0, 9_999));
            Assert.All(bike, r => Assert.InRange(r.Id, 10_000, 19_999));
        }
        Assert.Empty(index.Search("lane-nobody-configured", rows[0], 4, 0f));
        Assert.Equal(300, index.CountOf(WaterScope));
        Assert.Equal(600, index.Count);
    }

    [Theory]
    [InlineData(10_000, false)]
    [InlineData(TestSwitchSize, true)]
    public void Removed_entries_are_never_returned(int switchSize, bool graph)
    {
        var rows = VectorIndexTestData.Clustered(600, 20, Dims, seed: 4);
        using var index = new VectorIndex(Dims, switchSize);
        index.Load(rows.Select((v, i) => (WaterScope, (long)i, v)));
        Assert.Equal(graph, index.UsesGraph(WaterScope));

        var removed = Enumerable.Range(0, rows.Length).Where(i => i % 3 == 0).Select(i => (long)i).ToHashSet();
        foreach (var id in removed) Assert.True(index.Remove(id));
        Assert.False(index.Remove(0));
        Assert.Equal(graph, index.UsesGraph(WaterScope));

        for (var i = 0; i < rows.Length; i++)
        {
            var hits = index.Search(WaterScope, rows[i], 8, -1f);
            Assert.DoesNotContain(hits, h => removed.Contains(h.Id));
            // A kept entry is its own nearest neighbour (similarity 1); a removed one is gone.
            if (!removed.Contains(i)) Assert.Equal(i, hits[0].Id);
        }
        Assert.Equal(rows.Length - removed.Count, index.CountOf(WaterScope));
    }

    [Fact]
    public void Every_id_stays_findable_when_a_scope_crosses_the_switch_size()
    {
        var rows = VectorIndexTestData.Clustered(TestSwitchSize + 50, 10, Dims, seed: 5);
        using var index = new VectorIndex(Dims, TestSwitchSize);
        for (var i = 0; i < TestSwitchSize - 1; i++) index.Add(BikeScope, i, rows[i]);
        Assert.False(index.UsesGraph(BikeScope));

        for (var i = TestSwitchSize - 1; i < rows.Length; i++) index.Add(BikeScope, i, rows[i]);
        Assert.True(index.UsesGraph(BikeScope));

        for (var i = 0; i < rows.Length; i++)
        {
            var hit = Assert.Single(index.Search(BikeScope, rows[i], 1, 0.999f));
            Assert.Equal(i, hit.Id);
        }
    }

    [Fact]
    public void Shrinking_below_half_the_switch_size_returns_to_exact_search_and_keeps_the_rest()
    {
        var rows = VectorIndexTestData.Clustered(TestSwitchSize, 10, Dims, seed: 6);
        using var index = new VectorIndex(Dims, TestSwitchSize);
        index.Load(rows.Select((v, i) => (BikeScope, (long)i, v)));
        Assert.True(index.UsesGraph(BikeScope));

        for (var i = 0; i < TestSwitchSize * 2 / 3; i++) index.Remove(i);

        Assert.False(index.UsesGraph(BikeScope));
        for (var i = TestSwitchSize * 2 / 3; i < TestSwitchSize; i++)
            Assert.Equal(i, index.Search(BikeScope, rows[i], 1, 0.999f)[0].Id);
    }

    [Theory]
    [InlineData(10_000)]
    [InlineData(TestSwitchSize)]
    public void Min_similarity_keeps_only_entries_at_or_above_it(int switchSize)
    {
        var random = new Random(7);
        var axis = new float[Dims];
        axis[0] = 1;
        var side = new float[Dims];
        side[1] = 1;
        float[] cosines = [0.99f, 0.95f, 0.91f, 0.85f, 0.6f, 0.1f];
        using var index = new VectorIndex(Dims, switchSize);
        for (var i = 0; i < cosines.Length; i++) index.Add(WaterScope, i, VectorIndexTestData.AtCosine(axis, side, cosines[i]));
        // Filler far from the axis so the graph variant really has a graph.
        for (var i = 0; i < TestSwitchSize; i++)
        {
            var v = VectorIndexTestData.Unit(random, Dims);
            v[0] = 0;
            TensorPrimitives.Divide(v, TensorPrimitives.Norm(v), v);
            index.Add(WaterScope, 1_000 + i, v);
        }

        var hits = index.Search(WaterScope, axis, 4, minSimilarity: 0.9f);

        Assert.Equal([0L, 1L, 2L], hits.Select(h => h.Id));
        Assert.All(hits, h => Assert.True(h.Similarity >= 0.9f));
        Assert.Equal(0.99f, hits[0].Similarity, SimilarityTolerance);
        Assert.Empty(index.Search(WaterScope, axis, 4, minSimilarity: 0.995f));
    }

    [Fact]
    public void Adding_an_existing_id_replaces_its_vector_and_scope()
    {
        var rows = VectorIndexTestData.Units(2, Dims, seed: 8);
        using var index = new VectorIndex(Dims);
        index.Add(WaterScope, 42, rows[0]);
        index.Add(BikeScope, 42, rows[1]);

        Assert.Equal(1, index.Count);
        Assert.Equal(0, index.CountOf(WaterScope));
        Assert.Empty(index.Search(WaterScope, rows[0], 4, -1f));
        Assert.Equal(42, index.Search(BikeScope, rows[1], 4, 0.999f)[0].Id);
    }

    [Fact]
    public void Clear_empties_every_scope()
    {
        var rows = VectorIndexTestData.Units(TestSwitchSize + 10, Dims, seed: 9);
        using var index = new VectorIndex(Dims, TestSwitchSize);
        index.Load(rows.Select((v, i) => (i % 2 == 0 ? WaterScope : BikeScope, (long)i, v)));
        index.Load(rows.Take(5).Select((v, i) => ("siblings|third", 5_000L + i, v)));
        Assert.Equal(rows.Length + 5, index.Count);

        index.Clear();

        Assert.Equal(0, index.Count);
        Assert.Empty(index.Search(WaterScope, rows[0], 4, -1f));
        index.Add(WaterScope, 1, rows[1]);
        Assert.Equal(1, index.Search(WaterScope, rows[1], 4, 0.999f)[0].Id);
    }

    [Fact]
    public async Task Concurrent_readers_and_writers_never_throw_nor_return_removed_entries()
    {
        // Switch and hysteresis sizes small enough that the scope converts to a graph and back while readers run.
        const int switchSize = 120;
        const int writerOps = 1_500;
        var rows = VectorIndexTestData.Clustered(writerOps * 2, 15, Dims, seed: 10);
        using var index = new VectorIndex(Dims, switchSize);
        var removedAt = new ConcurrentDictionary<long, long>();
        long sequence = 0;
        var failures = new ConcurrentQueue<string>();
        var writersDone = 0;

        void Writer(int offset)
        {
            var random = new Random(offset);
            var live = new List<long>();
            for (var op = 0; op < writerOps; op++)
            {
                // Grow to about 200 live entries, then hover around it so the scope crosses the switch both ways.
                if (live.Count < 40 || (live.Count < 220 && random.Next(3) != 0))
                {
                    long id = offset + op;
                    index.Add(WaterScope, id, rows[offset + op]);
                    live.Add(id);
                }
                else
                {
                    var at = random.Next(live.Count);
                    var id = live[at];
                    live.RemoveAt(at);
                    Assert.True(index.Remove(id));
                    removedAt[id] = Interlocked.Increment(ref sequence);
                }
                if (op % 200 == 199)
                {
                    // Drain to below the hysteresis mark once in a while.
                    while (live.Count > 30)
                    {
                        var id = live[^1];
                        live.RemoveAt(live.Count - 1);
                        index.Remove(id);
                        removedAt[id] = Interlocked.Increment(ref sequence);
                    }
                }
            }
            Interlocked.Increment(ref writersDone);
        }

        void Reader(int seed)
        {
            var random = new Random(seed);
            var reads = 0;
            while (Volatile.Read(ref writersDone) < 2 || reads < 100)
            {
                var before = Interlocked.Read(ref sequence);
                var query = rows[random.Next(rows.Length)];
                var hits = index.Search(WaterScope, query, 4, 0f);
                foreach (var hit in hits)
                {
                    if (removedAt.TryGetValue(hit.Id, out var at) && at <= before) failures.Enqueue($"removed id {hit.Id} returned");
                }
                reads++;
            }
        }

        var tasks = new[]
        {
            Task.Run(() => Writer(0)), Task.Run(() => Writer(writerOps)),
            Task.Run(() => Reader(1)), Task.Run(() => Reader(2)), Task.Run(() => Reader(3)), Task.Run(() => Reader(4)),
        };
        await Task.WhenAll(tasks).WaitAsync(TimeSpan.FromMinutes(3));

        Assert.Empty(failures);
        Assert.Equal(index.Count, index.CountOf(WaterScope));
    }

    [Fact]
    public void Graph_recall_at_1_is_at_least_0_99_on_20k_clustered_entries()
    {
        var rows = VectorIndexTestData.Clustered(20_000, 80, Dims, seed: 11);
        using var index = new VectorIndex(Dims, switchSize: 1_000);
        index.Load(rows.Select((v, i) => (BikeScope, (long)i, v)));
        Assert.True(index.UsesGraph(BikeScope));
        var random = new Random(12);

        const int queries = 300;
        var hits = 0;
        for (var q = 0; q < queries; q++)
        {
            var query = VectorIndexTestData.Perturbed(rows[random.Next(rows.Length)], 0.3f, random);
            // Reference: brute force with System.Numerics.Tensors.TensorPrimitives.CosineSimilarity.
            var best = 0;
            for (var i = 1; i < rows.Length; i++)
            {
                if (TensorPrimitives.CosineSimilarity(rows[i], query) > TensorPrimitives.CosineSimilarity(rows[best], query)) best = i;
            }
            var got = index.Search(BikeScope, query, 1, -1f);
            if (got.Count == 1 && got[0].Id == best) hits++;
        }

        Assert.True(hits / (double)queries >= RecallTarget, $"recall@1 = {hits / (double)queries:F3}");
    }
}
