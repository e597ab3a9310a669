using BenchmarkDotNet.Running;

namespace RewriteProxy.Benchmarks;

// A named class rather than top-level statements: the proxy assembly has its own top-level Program.
public static class Program
{
    /// <summary>
    /// Every benchmark class in this assembly; pick with --filter (e.g. --filter '*Embed*'). <c>hit-latency</c> instead
    /// times hits of a running proxy process against the bare model run (Hits/HitLatency.cs; used by scripts/bench.sh);
    /// <c>hit-stages</c> times each stage of a hit in-process (Hits/HitStages.cs); <c>embed-shape</c> measures the memory
    /// and speed of one way to hold the model (Embedding/EmbedderShape.cs); <c>seed-store</c> fills a store for the restart
    /// measurement (Restart/StoreSeeder.cs; used by scripts/bench.sh restart).
    /// </summary>
    public static int Main(string[] args)
    {
        if (args.Length > 0 && args[0] == "hit-latency")
            return Hits.HitLatency.RunAsync(args[1..]).GetAwaiter().GetResult();
        if (args.Length > 0 && args[0] == "embedder-load")
            return Embedding.EmbedderShape.Load(args[1..]);
        if (args.Length > 0 && args[0] == "embed-shape")
            return Embedding.EmbedderShape.Run(args[1..]);
        if (args.Length > 0 && args[0] == "hit-stages")
            return Hits.HitStages.RunAsync(args[1..]).GetAwaiter().GetResult();
        if (args.Length > 0 && args[0] == "seed-store")
            return Restart.StoreSeeder.RunAsync(args[1..]).GetAwaiter().GetResult();
        BenchmarkSwitcher.FromAssembly(typeof(Program).Assembly).Run(args);
        return 0;
    }
}
