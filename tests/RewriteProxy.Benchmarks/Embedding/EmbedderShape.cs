using System.Collections.Concurrent;
using System.Diagnostics;
using System.Runtime;
using Microsoft.ML.OnnxRuntime;
using RewriteProxy.Embedding;

namespace RewriteProxy.Benchmarks.Embedding;

/// <summary>
/// Memory and speed of one way to hold the model, in a fresh process per shape (resident memory is per process):
/// <code>dotnet RewriteProxy.Benchmarks.dll embed-shape --sessions 2 --threads 1 [--prepack 1] [--arena 0] [--spin 0] [--spin-stop 1] [--gap-ms 5] [--global 0]</code>
/// sessions × threads each; prepack: one PrePackedWeightsContainer shared by the sessions (their packed weights are
/// held once); arena: ORT's CPU memory arena; spin: intra-op threads spin after work; global: one process-wide
/// intra-op pool of `threads` threads shared by every session instead of a pool per session.
/// Prints VmRSS after load and after the runs, the p50 of a lone question, and the time per question with 2 and 4
/// concurrent callers (each caller takes a free session, as OnnxEmbedder does).
/// </summary>
public static class EmbedderShape
{
    const string Question = "How long may I keep a shared bike before the overtime fee begins?";

    public static int Run(string[] args)
    {
        int sessions = 2, threads = 1;
        bool prepack = false, arena = true, spin = true, global = false, noPrepacking = false, spinStop = false;
        int gapMs = 0;
        for (int i = 0; i < args.Length; i++)
        {
            switch (args[i])
            {
                case "--sessions": sessions = int.Parse(args[++i]); break;
                case "--threads": threads = int.Parse(args[++i]); break;
                case "--prepack": prepack = args[++i] == "1"; break;
                case "--arena": arena = args[++i] == "1"; break;
                case "--spin": spin = args[++i] == "1"; break;
                case "--global": global = args[++i] == "1"; break;
                case "--no-prepacking": noPrepacking = args[++i] == "1"; break;
                case "--spin-stop": spinStop = args[++i] == "1"; break;
                case "--gap-ms": gapMs = int.Parse(args[++i]); break;
            }
        }
        double rssBefore = Rss();
        if (global)
        {
            var threading = new OrtThreadingOptions { GlobalIntraOpNumThreads = threads, GlobalInterOpNumThreads = 1, GlobalSpinControl = spin };
            var env = new EnvironmentCreationOptions { threadOptions = threading };
            OrtEnv.CreateInstanceWithOptions(ref env);
        }
        var pool = new InferenceSession[sessions];
        using var container = prepack ? new PrePackedWeightsContainer() : null;
        string[] inputNames;
        OrtValue[] input;
        {
            EmbeddingModelSource source = EmbeddingModelSource.Packaged();
            Console.WriteLine($"  model bytes read: {Split()}");
            for (int s = 0; s < sessions; s++)
            {
                var options = new SessionOptions
                {
                    GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
                    ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
                    IntraOpNumThreads = global ? 0 : threads,
                    InterOpNumThreads = 1,
                    EnableCpuMemArena = arena,
                };
                if (global) options.DisablePerSessionThreads();
                if (!spin) options.AddSessionConfigEntry("session.intra_op.allow_spinning", "0");
                if (noPrepacking) options.AddSessionConfigEntry("session.disable_prepacking", "1");
                // ORT's session.force_spinning_stop: threads spin within a run, and stop spinning when it ends.
                if (spinStop) options.AddSessionConfigEntry("session.force_spinning_stop", "1");
                pool[s] = container is null ? new InferenceSession(source.Model, options) : new InferenceSession(source.Model, options, container);
                Console.WriteLine($"  session {s + 1} created: {Split()}");
            }
            inputNames = pool[0].InputMetadata.Keys.ToArray();
            var encoder = WordPieceEncoder.Load(new MemoryStream(source.Vocabulary), "vocab.txt", 256);
            var ids = encoder.Encode(Question)!.Select(p => (long)p).ToArray();
            long[] shape = [1, ids.Length];
            input = inputNames.Select(name => name switch
            {
                "input_ids" => OrtValue.CreateTensorValueFromMemory(ids, shape),
                "attention_mask" => OrtValue.CreateTensorValueFromMemory(Enumerable.Repeat(1L, ids.Length).ToArray(), shape),
                _ => OrtValue.CreateTensorValueFromMemory(new long[ids.Length], shape),
            }).ToArray();
        }
        // The model's bytes are garbage now; a compacting full collection shows what the sessions themselves hold.
        GCSettings.LargeObjectHeapCompactionMode = GCLargeObjectHeapCompactionMode.CompactOnce;
        GC.Collect(2, GCCollectionMode.Forced, blocking: true, compacting: true);
        double rssLoaded = Rss();
        Console.WriteLine($"  after a compacting full GC: {Split()}");

        string[] outputNames = ["last_hidden_state"];
        using var runOptions = new RunOptions();
        var idle = new ConcurrentBag<InferenceSession>(pool);
        var turns = new SemaphoreSlim(sessions, sessions);
        void One()
        {
            turns.Wait();
            idle.TryTake(out var session);
            try { using var o = session!.Run(runOptions, inputNames, input, outputNames); }
            finally { idle.Add(session!); turns.Release(); }
        }

        for (int i = 0; i < 50; i++) One();
        var lone = new double[300];
        var cpu0 = Process.GetCurrentProcess().TotalProcessorTime;
        for (int i = 0; i < lone.Length; i++)
        {
            long t0 = Stopwatch.GetTimestamp();
            One();
            lone[i] = Stopwatch.GetElapsedTime(t0).TotalMilliseconds;
            // A pause between questions, as a proxy has between semantic hits: spinning threads burn CPU in it.
            if (gapMs > 0) Thread.Sleep(gapMs);
        }
        // CPU time per lone question, spinning threads included: unlike wall time, it hardly depends on other load.
        double loneCpu = (Process.GetCurrentProcess().TotalProcessorTime - cpu0).TotalMilliseconds / lone.Length;
        Array.Sort(lone);
        double PerQuestion(int callers, int each)
        {
            var watch = Stopwatch.StartNew();
            var workers = Enumerable.Range(0, callers).Select(_ => new Thread(() => { for (int i = 0; i < each; i++) One(); })).ToArray();
            foreach (var w in workers) w.Start();
            foreach (var w in workers) w.Join();
            return watch.Elapsed.TotalMilliseconds / (callers * each);
        }
        double two = PerQuestion(2, 100), four = PerQuestion(4, 50);
        double rssAfter = Rss();
        Console.WriteLine($"sessions {sessions} threads {threads} prepack {(prepack ? 1 : 0)} arena {(arena ? 1 : 0)} spin {(spin ? 1 : 0)} spin-stop {(spinStop ? 1 : 0)} global {(global ? 1 : 0)}: " +
            $"VmRSS before {rssBefore:0} MB, loaded {rssLoaded:0} MB (+{rssLoaded - rssBefore:0}), after runs {rssAfter:0} MB; " +
            $"lone p10 {lone[lone.Length / 10]:0.00} p50 {lone[lone.Length / 2]:0.00} ms p90 {lone[lone.Length * 9 / 10]:0.00} ms, CPU {loneCpu:0.00} ms (gap {gapMs} ms); per question at 2 callers {two:0.00} ms, at 4 callers {four:0.00} ms; load {File.ReadAllText("/proc/loadavg").Split(' ')[0]}");
        foreach (var v in input) v.Dispose();
        foreach (var s in pool) s.Dispose();
        return 0;
    }

    /// <summary>
    /// <c>embedder-load --sessions N</c>: resident memory right after <see cref="OnnxEmbedder.Load(RewriteProxy.Embedding.EmbeddingOptions, int, Microsoft.Extensions.Logging.ILogger?)"/>,
    /// the proxy's own loading path (mapped resource pages and the managed model copy given back), to set beside the
    /// raw sessions of <see cref="Run"/>.
    /// </summary>
    public static int Load(string[] args)
    {
        int sessions = args.Length > 1 && args[0] == "--sessions" ? int.Parse(args[1]) : OnnxEmbedder.DefaultSessions;
        Console.WriteLine($"  before load: {Split()}");
        using var embedder = OnnxEmbedder.Load(new RewriteProxy.Embedding.EmbeddingOptions(), sessions);
        Console.WriteLine($"OnnxEmbedder.Load with {sessions} session(s): {Split()}, VmRSS {Rss():0} MB");
        return 0;
    }

    static string Split() => string.Join(", ", File.ReadLines("/proc/self/status")
        .Where(l => l.StartsWith("RssAnon:") || l.StartsWith("RssFile:"))
        .Select(l => $"{l.Split(':')[0]} {double.Parse(l.Split(' ', StringSplitOptions.RemoveEmptyEntries)[1]) / 1024:0} MB"))
        + $", managed heap {GC.GetTotalMemory(false) / 1048576.0:0} MB";

    static double Rss() =>
        double.Parse(File.ReadLines("/proc/self/status").First(l => l.StartsWith("VmRSS:")).Split(' ', StringSplitOptions.RemoveEmptyEntries)[1]) / 1024;
}
