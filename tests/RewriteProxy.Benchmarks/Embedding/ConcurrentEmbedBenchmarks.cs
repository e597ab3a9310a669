using BenchmarkDotNet.Attributes;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;

namespace RewriteProxy.Benchmarks.Embedding;

/// <summary>
/// Four callers embedding one question each, over and over: does one shared session (all threads) or a pool of
/// sessions (threads split between them) serve concurrent lane calls faster on this machine?
/// </summary>
[MemoryDiagnoser]
public class ConcurrentEmbedBenchmarks
{
    const int Callers = 4;
    const int EmbedsPerCaller = 8;

    static readonly string[] Questions =
    [
        "How do I renew my library card?",
        "When does the Riverton water utility read the meters?",
        "Can I bring my dog to the bike-share docking station?",
        "What are the visiting hours at Northgate Hospital on Sundays?",
    ];

    OnnxEmbedder _embedder = null!;

    /// <summary>1 = one session shared by all callers with every core as its threads; 2 = two sessions, one thread each.</summary>
    [Params(1, 2)]
    public int Sessions { get; set; }

    [GlobalSetup]
    public void Setup() => _embedder = OnnxEmbedder.Load(new EmbeddingOptions(), Sessions);

    [Benchmark(OperationsPerInvoke = Callers * EmbedsPerCaller)]
    public void Four_callers_one_question_each()
    {
        var callers = new Task[Callers];
        for (int c = 0; c < Callers; c++)
        {
            string question = Questions[c];
            callers[c] = Task.Run(() =>
            {
                for (int i = 0; i < EmbedsPerCaller; i++)
                    _embedder.Embed(question);
            });
        }
        Task.WaitAll(callers);
    }

    [GlobalCleanup]
    public void Cleanup() => _embedder.Dispose();
}
