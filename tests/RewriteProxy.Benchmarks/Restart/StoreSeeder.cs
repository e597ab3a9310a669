using System.Diagnostics;
using Microsoft.Extensions.Logging.Abstractions;
using RewriteProxy.Store;

namespace RewriteProxy.Benchmarks.Restart;

/// <summary>
/// <c>seed-store STORE_PATH ENTRIES [SEED]</c> (scripts/bench.sh restart): fills a SQLite store that holds one real
/// entry of lane <c>draft</c> (stored by the proxy on a miss) with ENTRIES − 1 synthetic entries in the same scope, so a
/// restart has ENTRIES vectors to index in one scope: a graph at the default switch size, the slow case. Vectors are
/// <see cref="IndexData.Clustered"/> (see there); questions are "synthetic question {i}". Invented data, for the
/// measurement only. Writes through <see cref="IRewriteStore.AddAsync"/>, as the proxy does.
/// </summary>
internal static class StoreSeeder
{
    /// <summary>Adds in flight at once: the store commits up to 512 per transaction, so a few batches queue behind each other.</summary>
    const int InFlight = 4096;

    public static async Task<int> RunAsync(string[] args)
    {
        if (args.Length < 2 || !long.TryParse(args[1], out var total) || total < 2)
        {
            Console.Error.WriteLine("usage: seed-store STORE_PATH ENTRIES [SEED]");
            return 2;
        }
        var seed = args.Length > 2 ? int.Parse(args[2]) : 17;
        var options = new StoreOptions { Path = args[0], MaxEntries = total + 1_000 };
        await using var store = StoreFactory.Create(options, new EventsOptions { Enabled = false }, NullLoggerFactory.Instance);
        await store.OpenAsync(StoreAccess.ReadWrite, CancellationToken.None);
        var real = (await store.ListAsync(new EntryQuery(Lane: "draft", Limit: 2), CancellationToken.None)).Single();
        var modelId = real.ModelId ?? throw new InvalidOperationException("the real entry has no vector");
        var dimensions = (await store.ReadVectorsAsync(modelId, CancellationToken.None)).Rows.Single().Vector.Length;

        var watch = Stopwatch.StartNew();
        var vectors = IndexData.Clustered((int)(total - 1), dimensions, seed);
        Console.WriteLine($"seed-store: {vectors.Length} vectors of {dimensions} dimensions made in {watch.Elapsed.TotalSeconds:F1} s");
        watch.Restart();
        var pending = new List<Task>(InFlight);
        var now = DateTimeOffset.UtcNow;
        for (var i = 0; i < vectors.Length; i++)
        {
            var question = $"synthetic question {i}";
            pending.Add(store.AddAsync(new NewEntry(real.ScopeKey, real.PartitionHash, real.Lane, question, question, vectors[i], modelId,
                "synthetic answer " + i, EntryScores.None, real.ResponseModel, 10, 10, now), CancellationToken.None));
            vectors[i] = null!; // the store has its own copy once written
            if (pending.Count < InFlight) continue;
            await Task.WhenAll(pending);
            pending.Clear();
            if ((i + 1) % 100_000 < InFlight)
                Console.WriteLine($"seed-store: {i + 1} entries in {watch.Elapsed.TotalSeconds:F0} s");
        }
        await Task.WhenAll(pending);
        await store.FlushAsync(CancellationToken.None);
        var stats = await store.StatsAsync(CancellationToken.None);
        Console.WriteLine($"seed-store: {vectors.Length} entries added in {watch.Elapsed.TotalSeconds:F1} s; the store holds " +
            $"{stats.Lanes.Sum(l => l.Entries)} entries, {stats.Bytes / 1e6:F0} MB");
        return 0;
    }
}
