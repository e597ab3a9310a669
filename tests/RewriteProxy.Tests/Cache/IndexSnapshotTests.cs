using System.Buffers.Binary;
using System.Numerics.Tensors;
using System.Security.Cryptography;
using RewriteProxy.Cache;
using RewriteProxy.Cache.Snapshots;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// Index snapshots on their own: a saved and reloaded index answers as the original did, graphs included, and a file
/// that must not be trusted is refused with its reason. (The start-up path, with a store, is in IndexSnapshotStartTests.)
/// </summary>
public sealed class IndexSnapshotTests : IDisposable
{
    const int Dims = 384;
    const string Model = "test-model";
    const string Store = "store-0001";
    const string Big = "draft|big";
    const string Middle = "siblings|middle";
    const string Small = "draft|small";
    /// <summary>Small enough that two scopes get graphs with a few hundred entries.</summary>
    const int SwitchSize = 200;

    /// <summary>
    /// Low search breadth, so that graph searches are visibly approximate: results equal to the original's then show
    /// the reloaded graph has the same structure, not merely the same rows.
    /// </summary>
    static readonly HnswSettings Narrow = new() { ExpansionSearch = 4, RerankCandidates = 4 };

    readonly string _folder = Directory.CreateTempSubdirectory("rewriteproxy-snapshot-").FullName;

    string SnapshotPath => Path.Combine(_folder, "cache.db.index");

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    /// <summary>Two graph scopes (one grown past the switch, then added to and removed from) and one exact scope.</summary>
    static (VectorIndex Index, Dictionary<string, float[][]> Rows) Original()
    {
        var index = new VectorIndex(Dims, SwitchSize, Narrow);
        var rows = new Dictionary<string, float[][]>
        {
            [Big] = VectorIndexTestData.Clustered(1_500, 20, Dims, seed: 41),
            [Middle] = VectorIndexTestData.Clustered(400, 8, Dims, seed: 42),
            [Small] = VectorIndexTestData.Clustered(30, 3, Dims, seed: 43),
        };
        long id = 1;
        foreach (var (scope, vectors) in rows)
            foreach (var v in vectors) index.Add(scope, id++, v);
        // Removed ids stay in the graph as deleted nodes until reused: part of the structure a reload must keep.
        for (long gone = 1; gone <= 300; gone += 3) index.Remove(gone);
        return (index, rows);
    }

    static IEnumerable<(string Scope, float[] Query)> Queries(Dictionary<string, float[][]> rows)
    {
        var random = new Random(44);
        foreach (var (scope, vectors) in rows)
            for (var q = 0; q < 100; q++) yield return (scope, VectorIndexTestData.Perturbed(vectors[random.Next(vectors.Length)], 0.3f, random));
    }

    static VectorIndex Reload(string path, HnswSettings? hnsw = null, int switchSize = SwitchSize)
    {
        var index = new VectorIndex(Dims, switchSize, hnsw ?? Narrow);
        using var reader = IndexSnapshotReader.Open(path);
        reader.Check(Model, Dims, index.Hnsw);
        IndexSnapshotReader.CheckStore(reader.Header, Store);
        index.Restore(reader.ReadScopes(index.Hnsw));
        return index;
    }

    [Fact]
    public void A_reloaded_index_gives_the_same_results_as_the_original_graph_scopes_included()
    {
        var (original, rows) = Original();
        using var _ = original;
        Assert.True(original.UsesGraph(Big) && original.UsesGraph(Middle) && !original.UsesGraph(Small));

        var saved = IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, Sequence: 1234), SnapshotPath)!;
        using var reloaded = Reload(SnapshotPath);

        Assert.Equal((original.Count, 3, 2), (saved.Entries, saved.Scopes, saved.Graphs));
        Assert.Equal(original.Count, reloaded.Count);
        foreach (var scope in rows.Keys)
        {
            Assert.Equal(original.CountOf(scope), reloaded.CountOf(scope));
            Assert.Equal(original.UsesGraph(scope), reloaded.UsesGraph(scope));
        }
        var approximate = 0;
        foreach (var (scope, query) in Queries(rows))
        {
            var expected = original.Search(scope, query, 4, -1f);
            Assert.Equal(expected, reloaded.Search(scope, query, 4, -1f));
            // Reference for "approximate": brute force over the scope's rows with TensorPrimitives.CosineSimilarity.
            var bestExact = rows[scope].Select((v, i) => TensorPrimitives.CosineSimilarity(v, query)).Max();
            if (expected.Count == 0 || expected[0].Similarity < bestExact - 1e-5f) approximate++;
        }
        // The graph was searched narrowly enough to miss the exact best sometimes (removed ids aside), so the equality
        // above could only hold for the same graph structure.
        Assert.True(approximate > 0, "every graph search found the exact best: the test cannot tell graphs apart");
    }

    [Fact]
    public void A_reloaded_index_keeps_following_changes_graph_scopes_included()
    {
        var (original, rows) = Original();
        using var _ = original;
        IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 1), SnapshotPath);
        using var reloaded = Reload(SnapshotPath, new HnswSettings());
        var added = VectorIndexTestData.Unit(new Random(45), Dims);

        reloaded.Add(Big, 99_999, added);
        reloaded.Remove(2);

        Assert.Equal(99_999, reloaded.Search(Big, added, 1, 0.99f).Single().Id);
        Assert.DoesNotContain(reloaded.Search(Big, rows[Big][1], 4, -1f), r => r.Id == 2);
    }

    [Fact]
    public async Task While_a_scope_is_written_out_searches_and_writes_go_on_and_the_view_stays_as_it_was_frozen()
    {
        var (original, rows) = Original();
        using var _ = original;
        using var frozen = new ManualResetEventSlim();
        using var release = new ManualResetEventSlim();
        var written = new Dictionary<string, byte[]>();
        var save = Task.Run(() => original.ForEachScopeFrozen(frozen: view =>
        {
            if (view.Name == Big)
            {
                frozen.Set();
                release.Wait();
            }
            using var bytes = new MemoryStream();
            view.WriteRows(bytes);
            written[view.Name] = bytes.ToArray();
        }, thawed: () => { }));
        frozen.Wait();
        var countAtFreeze = original.CountOf(Big);
        var added = VectorIndexTestData.Unit(new Random(46), Dims);

        // Big is frozen now: it is searched, grown and shrunk, and none of it waits for the view.
        var found = original.Search(Big, rows[Big][10], 1, 0.99f);
        var writes = Task.Run(() =>
        {
            original.Add(Big, 99_999, added);
            original.Remove(11);
        });
        var writesWaited = await Task.WhenAny(writes, Task.Delay(TimeSpan.FromSeconds(5))) != writes;
        release.Set();
        await save;

        Assert.Equal(11, found.Single().Id);
        Assert.False(writesWaited, "a writer waited for a frozen scope");
        // The view: the rows as they were frozen (11 there, 99 999 not), each id with its own vector, though the
        // removal moved the last row into 11's place and the addition wrote where that last row had been.
        var (ids, vectors) = Decode(written[Big], countAtFreeze);
        Assert.Contains(11L, ids);
        Assert.DoesNotContain(99_999L, ids);
        var byId = Initial(rows);
        for (var i = 0; i < ids.Length; i++) Assert.Equal(byId[ids[i]].Vector, vectors[i]);
        // Thawed: the graph took in the changes queued meanwhile.
        Assert.True(original.UsesGraph(Big));
        Assert.Equal(99_999, original.Search(Big, added, 1, 0.99f).Single().Id);
        Assert.DoesNotContain(original.Search(Big, rows[Big][10], 4, -1f), r => r.Id == 11);
    }

    /// <summary>A frozen view's rows as WriteRows lays them out: the ids, then the vectors.</summary>
    static (long[] Ids, float[][] Vectors) Decode(byte[] rows, int count)
    {
        var ids = System.Runtime.InteropServices.MemoryMarshal.Cast<byte, long>(rows.AsSpan(0, count * 8)).ToArray();
        var floats = System.Runtime.InteropServices.MemoryMarshal.Cast<byte, float>(rows.AsSpan(count * 8)).ToArray();
        return (ids, Enumerable.Range(0, count).Select(i => floats.AsSpan(i * Dims, Dims).ToArray()).ToArray());
    }

    /// <summary>The entries of <see cref="Original"/> by id (ids 1, 2, ... in the order they were added).</summary>
    static Dictionary<long, (string Scope, float[] Vector)> Initial(Dictionary<string, float[][]> rows) =>
        rows.SelectMany(r => r.Value.Select(v => (Scope: r.Key, Vector: v))).Select((e, i) => (Id: i + 1L, e)).ToDictionary(x => x.Id, x => x.e);

    [Fact]
    public async Task A_snapshot_saved_under_writes_plus_the_changes_after_its_sequence_is_the_index_as_it_ends()
    {
        var (original, rows) = Original();
        using var _ = original;
        // The change log a follower would replay: every write with its sequence, made while the snapshot is saved.
        var log = new List<(long Sequence, string Scope, long Id, float[]? Vector)>();
        long sequence = 0;
        var random = new Random(47);
        var scopes = rows.Keys.ToArray();
        using var stop = new CancellationTokenSource();
        var writer = Task.Run(() =>
        {
            long next = 50_000;
            while (!stop.IsCancellationRequested)
            {
                var scope = scopes[random.Next(scopes.Length)];
                (string, long, float[]?) change = random.Next(3) == 0
                    ? (scope, 1 + random.Next(1_930), null)
                    : (scope, next++, VectorIndexTestData.Unit(random, Dims));
                lock (log) log.Add((Interlocked.Increment(ref sequence), change.Item1, change.Item2, change.Item3));
                if (change.Item3 is { } v) original.Add(change.Item1, change.Item2, v);
                else original.Remove(change.Item2);
            }
        });
        await Task.Delay(50);
        // Read before saving, as IndexSnapshots reads the follower's sequence: every scope is saved as of it or later.
        var origin = Interlocked.Read(ref sequence);

        IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, origin), SnapshotPath);
        await Task.Delay(50);
        await stop.CancelAsync();
        await writer;

        using var reloaded = Reload(SnapshotPath, new HnswSettings());
        foreach (var (_, scope, id, vector) in log.Where(c => c.Sequence > origin))
        {
            if (vector is null) reloaded.Remove(id);
            else reloaded.Add(scope, id, vector);
        }
        Assert.True(log.Count(c => c.Sequence > origin) > 0, "no write fell after the snapshot's sequence: nothing was replayed");
        Assert.Equal(original.Count, reloaded.Count);
        foreach (var scope in scopes) Assert.Equal(original.CountOf(scope), reloaded.CountOf(scope));
        // Every entry written during the save is where its last change left it: found by its own vector, or gone.
        foreach (var (_, scope, id, vector) in log.Where(c => c.Vector is not null))
            Assert.Equal([id], reloaded.Search(scope, vector!, 1, 0.999f).Select(r => r.Id));
        var initial = Initial(rows);
        foreach (var id in log.Where(c => c.Vector is null).Select(c => c.Id).Distinct())
            Assert.DoesNotContain(reloaded.Search(initial[id].Scope, initial[id].Vector, 4, -1f), r => r.Id == id);
    }

    [Fact]
    public void A_snapshot_the_caller_no_longer_vouches_for_replaces_nothing()
    {
        var (original, _) = Original();
        using var _ = original;
        IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 1), SnapshotPath);
        original.Remove(3);

        var saved = IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 2), SnapshotPath, stillValid: () => false);

        Assert.Null(saved);
        using var reader = IndexSnapshotReader.Open(SnapshotPath);
        Assert.Equal(1L, reader.Header.Sequence);
        Assert.Equal([SnapshotPath], Directory.GetFiles(_folder));
    }

    [Fact]
    public void A_snapshot_is_private_to_the_proxys_user_and_leaves_no_temporary_file()
    {
        var (original, _) = Original();
        using var _ = original;

        IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 1), SnapshotPath);

        // Read back with GNU coreutils' stat, not with the API that set it.
        var (exit, mode) = FileFaults.Run("stat", "-c", "%a", SnapshotPath);
        Assert.Equal((0, "600"), (exit, mode.Trim()));
        Assert.Equal([SnapshotPath], Directory.GetFiles(_folder));
    }

    [Fact]
    public void A_new_snapshot_replaces_the_old_one_whole()
    {
        var (original, _) = Original();
        using var _ = original;
        IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 1), SnapshotPath);
        original.Remove(3);

        IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 2), SnapshotPath);

        using var reader = IndexSnapshotReader.Open(SnapshotPath);
        Assert.Equal((2L, (long)original.Count), (reader.Header.Sequence, reader.Header.Entries));
    }

    public static TheoryData<string, SnapshotRejection> OtherOrigins => new()
    {
        { "model", SnapshotRejection.OtherModel },
        { "dimensions", SnapshotRejection.OtherDimensions },
        { "store", SnapshotRejection.OtherStore },
        { "graphs", SnapshotRejection.OtherGraphs },
    };

    [Theory]
    [MemberData(nameof(OtherOrigins))]
    public void A_snapshot_from_elsewhere_is_refused_with_its_reason(string what, SnapshotRejection reason)
    {
        var (original, _) = Original();
        using var _ = original;
        IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 1), SnapshotPath);
        using var reader = IndexSnapshotReader.Open(SnapshotPath);

        var refused = Assert.Throws<SnapshotRejectedException>(() =>
        {
            reader.Check(what == "model" ? "another-model" : Model, what == "dimensions" ? 768 : Dims,
                what == "graphs" ? Narrow with { Connectivity = 32 } : Narrow);
            IndexSnapshotReader.CheckStore(reader.Header, what == "store" ? "store-0002" : Store);
        });

        Assert.Equal(reason, refused.Reason);
    }

    [Fact]
    public void A_snapshot_in_a_newer_format_is_refused()
    {
        SaveAndDamage(bytes => BinaryPrimitives.WriteInt32LittleEndian(bytes.AsSpan(8), IndexSnapshotFormat.Version + 1), rehash: true);

        Assert.Equal(SnapshotRejection.NewerFormat, Assert.Throws<SnapshotRejectedException>(() => IndexSnapshotReader.Open(SnapshotPath)).Reason);
    }

    [Fact]
    public void A_snapshot_with_one_flipped_bit_is_refused_by_its_checksum()
    {
        SaveAndDamage(bytes => bytes[bytes.Length / 2] ^= 0x10, rehash: false);

        Assert.Equal(SnapshotRejection.BadChecksum, Assert.Throws<SnapshotRejectedException>(() => IndexSnapshotReader.Open(SnapshotPath)).Reason);
    }

    [Theory]
    [InlineData(0.5)]
    [InlineData(0.999)]
    [InlineData(0.0)]
    public void A_truncated_snapshot_is_refused(double kept)
    {
        var (original, _) = Original();
        using var _ = original;
        IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 1), SnapshotPath);
        using (var file = new FileStream(SnapshotPath, FileMode.Open)) file.SetLength((long)(file.Length * kept));

        Assert.Equal(SnapshotRejection.Truncated, Assert.Throws<SnapshotRejectedException>(() => IndexSnapshotReader.Open(SnapshotPath)).Reason);
    }

    [Fact]
    public void A_file_that_is_no_snapshot_is_refused()
    {
        File.WriteAllText(SnapshotPath, "SQLite format 3\0 and then some more bytes than a header has, to be sure of it.");

        Assert.Equal(SnapshotRejection.NotASnapshot, Assert.Throws<SnapshotRejectedException>(() => IndexSnapshotReader.Open(SnapshotPath)).Reason);
    }

    [Fact]
    public void A_snapshot_whose_counts_do_not_add_up_is_refused_even_with_a_matching_checksum()
    {
        SaveAndDamage(bytes => BinaryPrimitives.WriteInt64LittleEndian(bytes.AsSpan(36), 7), rehash: true);
        using var reader = IndexSnapshotReader.Open(SnapshotPath);

        Assert.Equal(SnapshotRejection.Malformed, Assert.Throws<SnapshotRejectedException>(() => reader.ReadScopes(Narrow)).Reason);
    }

    /// <summary>Saves the original index, changes its bytes, and (to get past the checksum) re-seals them with a fresh SHA-256.</summary>
    void SaveAndDamage(Action<byte[]> damage, bool rehash)
    {
        var (original, _) = Original();
        using (original) IndexSnapshotWriter.Save(original, new SnapshotOrigin(Model, Store, 1), SnapshotPath);
        var bytes = File.ReadAllBytes(SnapshotPath);
        damage(bytes);
        if (rehash) SHA256.HashData(bytes.AsSpan(0, bytes.Length - 32)).CopyTo(bytes.AsSpan(bytes.Length - 32));
        File.WriteAllBytes(SnapshotPath, bytes);
    }
}
