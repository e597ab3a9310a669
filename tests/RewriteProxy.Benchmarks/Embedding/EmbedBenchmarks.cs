using BenchmarkDotNet.Attributes;
using BenchmarkDotNet.Configs;
using Microsoft.ML.OnnxRuntime;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;

namespace RewriteProxy.Benchmarks.Embedding;

/// <summary>
/// The embedder end to end against the floor: a bare <see cref="InferenceSession.Run(RunOptions, IReadOnlyCollection{string}, IReadOnlyCollection{OrtValue}, IReadOnlyCollection{string})"/>
/// on the same word-piece ids, prepared once. The ratio is what tokenization, padding, pooling and normalisation cost.
/// </summary>
[MemoryDiagnoser]
[GroupBenchmarksBy(BenchmarkLogicalGroupRule.ByCategory)]
[CategoriesColumn]
public class EmbedBenchmarks
{
    const string Question = "How long can I keep a shared bike before the overtime fee starts?";

    static readonly string[] Questions =
    [
        "How do I renew my library card?",
        "When does the Riverton water utility read the meters?",
        "Can I bring my dog to the bike-share docking station?",
        "What are the visiting hours at Northgate Hospital on Sundays?",
        "Why is my water bill higher in July than in January?",
        "Is a helmet required for riders under 16?",
    ];

    // Invented scenario text, longer than 256 word pieces, so it is cut at the limit.
    static readonly string Draft = string.Join(" ", Enumerable.Repeat(
        "Members of the Riverton bike-share scheme unlock any bike at any docking station with the app, a key fob " +
        "or a single-ride code. Each ride is free for the first thirty minutes on an annual plan; after that an " +
        "overtime fee applies for every further fifteen minutes, charged when the bike is docked again.", 6));

    OnnxEmbedder _embedder = null!;
    InferenceSession _session = null!;
    readonly RunOptions _runOptions = new();
    string[] _inputNames = null!;
    readonly string[] _outputNames = ["last_hidden_state"];
    OrtValue[] _questionInput = null!, _batchInput = null!, _draftInput = null!;

    [GlobalSetup]
    public void Setup()
    {
        var options = new EmbeddingOptions();
        // One session with every core, as the bare session below: only the code around the run differs.
        _embedder = OnnxEmbedder.Load(options, sessionCount: 1);
        EmbeddingModelSource source = EmbeddingModelSource.Packaged();
        var sessionOptions = new Microsoft.ML.OnnxRuntime.SessionOptions
        {
            GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            IntraOpNumThreads = Environment.ProcessorCount,
            InterOpNumThreads = 1,
        };
        _session = new InferenceSession(source.Model, sessionOptions);
        _inputNames = _session.InputMetadata.Keys.ToArray();
        WordPieceEncoder encoder = WordPieceEncoder.Load(new MemoryStream(source.Vocabulary), "vocab.txt", options.MaxTokens);

        _questionInput = Prepare(encoder, [Question]);
        _batchInput = Prepare(encoder, Questions);
        _draftInput = Prepare(encoder, [Draft]);
        Console.WriteLine($"// word pieces: question {encoder.Encode(Question)!.Count}, batch longest {Questions.Max(q => encoder.Encode(q)!.Count)}, draft {encoder.Encode(Draft)!.Count}");
    }

    /// <summary>Padded ids, mask and zero token types, in the model's input order.</summary>
    OrtValue[] Prepare(WordPieceEncoder encoder, string[] texts)
    {
        IReadOnlyList<int>[] pieces = texts.Select(t => encoder.Encode(t)!).ToArray();
        int longest = pieces.Max(p => p.Count);
        var ids = new long[texts.Length * longest];
        var mask = new long[ids.Length];
        for (int r = 0; r < pieces.Length; r++)
            for (int t = 0; t < pieces[r].Count; t++)
            {
                ids[r * longest + t] = pieces[r][t];
                mask[r * longest + t] = 1;
            }
        long[] shape = [texts.Length, longest];
        return _inputNames.Select(name => name switch
        {
            "input_ids" => OrtValue.CreateTensorValueFromMemory(ids, shape),
            "attention_mask" => OrtValue.CreateTensorValueFromMemory(mask, shape),
            _ => OrtValue.CreateTensorValueFromMemory(new long[ids.Length], shape),
        }).ToArray();
    }

    float BareRun(OrtValue[] input)
    {
        using var outputs = _session.Run(_runOptions, _inputNames, input, _outputNames);
        return outputs[0].GetTensorDataAsSpan<float>()[0];
    }

    [BenchmarkCategory("question-16"), Benchmark(Baseline = true)]
    public float Question_bare_run() => BareRun(_questionInput);

    [BenchmarkCategory("question-16"), Benchmark]
    public float[] Question_embed() => _embedder.Embed(Question);

    [BenchmarkCategory("batch-6"), Benchmark(Baseline = true)]
    public float Batch_bare_run() => BareRun(_batchInput);

    [BenchmarkCategory("batch-6"), Benchmark]
    public float[][] Batch_embed() => _embedder.Embed(Questions);

    [BenchmarkCategory("draft-256"), Benchmark(Baseline = true)]
    public float Draft_bare_run() => BareRun(_draftInput);

    [BenchmarkCategory("draft-256"), Benchmark]
    public float[] Draft_embed() => _embedder.Embed(Draft);

    [GlobalCleanup]
    public void Cleanup()
    {
        _embedder.Dispose();
        _session.Dispose();
        foreach (OrtValue value in _questionInput.Concat(_batchInput).Concat(_draftInput))
            value.Dispose();
        _runOptions.Dispose();
    }
}
