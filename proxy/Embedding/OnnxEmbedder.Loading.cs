using System.Diagnostics;
using Microsoft.Extensions.Logging;
using Microsoft.ML.OnnxRuntime;
using SessionOptions = Microsoft.ML.OnnxRuntime.SessionOptions;

namespace RewriteProxy.Embedding;

/// <summary>Loading: the model's sessions, their settings, and the memory given back once they exist.</summary>
public sealed partial class OnnxEmbedder
{
    /// <summary>
    /// Loads the model named by <paramref name="options"/> (or the packaged all-MiniLM-L6-v2), checks that it fits,
    /// and runs it once so that the first real call is not the slow one.
    /// </summary>
    /// <exception cref="EmbedderLoadException">A file is missing or unreadable, or the model does not fit.</exception>
    public static OnnxEmbedder Load(EmbeddingOptions options, ILogger? logger = null) =>
        Load(options, DefaultSessions, logger);

    /// <summary>
    /// Sessions kept by <see cref="Load(EmbeddingOptions, ILogger?)"/>, the threads split between them: one session with
    /// every thread. It holds the model's weights once (two sessions held them twice: ~90 MB more resident memory), and
    /// a lone question, the common case for a semantic hit, runs on every core instead of on half of them. Callers
    /// share it concurrently (InferenceSession.Run is thread-safe). Measured against two one-thread sessions on 2 cores
    /// (docs/measurements/performance.md): no slower alone or with 2 or 4 concurrent callers once its threads do
    /// not spin (<see cref="SetThreadWaiting"/>); with ORT's default spinning it was about twice as slow under load.
    /// </summary>
    internal const int DefaultSessions = 1;

    /// <summary>
    /// How ORT's intra-op threads wait for work: they sleep, never spin. On a 2-core proxy a spinning thread takes the
    /// core that request handling or a concurrent question needs. Measured (docs/measurements/performance.md §8), one
    /// 2-thread session: ORT's default spinning costs 11.8 ms of CPU per lone question against 6.5–8.0 with a 5 ms pause
    /// between questions. Spinning only within a run (<c>session.force_spinning_stop</c>) makes a lone question 20–30 %
    /// faster (p50 2.6–3.6 against 3.8–4.9 ms), but served semantic hits under 4 and 16 concurrent connections then cost
    /// 9–12 % more CPU each, with 8–11 % fewer hits per second: not kept.
    /// </summary>
    internal static void SetThreadWaiting(SessionOptions options) =>
        options.AddSessionConfigEntry("session.intra_op.allow_spinning", "0");

    /// <summary>As <see cref="Load(EmbeddingOptions, ILogger?)"/> with <paramref name="sessionCount"/> sessions: 1 = one session
    /// shared by every caller; more = a pool, each session with its share of the threads.</summary>
    internal static OnnxEmbedder Load(EmbeddingOptions options, int sessionCount, ILogger? logger = null)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(sessionCount, 1);
        int threads = options.Threads > 0 ? options.Threads : Environment.ProcessorCount;
        // More sessions than threads would leave a session without a thread of its own.
        sessionCount = Math.Min(sessionCount, threads);
        long started = Stopwatch.GetTimestamp();
        OnnxEmbedder embedder = Create(options, sessionCount, threads);
        // The model's bytes (a 90 MB managed array) are garbage once the sessions exist: ~85 MB of VmRSS given back.
        // The proxy compacts once more when start-up is done (ProxyApp); this one, before the rest of start-up, keeps its
        // peak down: VmHWM 322 MB with it, 397–419 MB without it, the same VmRSS once started (two runs each).
        HeapCompaction.Now();
        logger?.LogInformation(
            "Embedding model {Model} loaded in {Milliseconds} ms: id {ModelId}, {Dimension} dimensions, {Sessions} session(s) x {Threads} thread(s), {MaxTokens} word pieces",
            embedder._modelName, (long)Stopwatch.GetElapsedTime(started).TotalMilliseconds, embedder.ModelId,
            embedder.Dimension, sessionCount, embedder._sessionOptions.IntraOpNumThreads, embedder.MaxTokens);
        return embedder;
    }

    /// <summary>
    /// Reads the model and builds the sessions. A method of its own so that the model's bytes (a 90 MB managed array)
    /// are referenced from no frame once it returns: ONNX Runtime keeps its own copy, and
    /// <see cref="HeapCompaction.Now"/> can then give the array's memory back.
    /// </summary>
    static OnnxEmbedder Create(EmbeddingOptions options, int sessionCount, int threads)
    {
        EmbeddingModelSource source = EmbeddingModelSource.Resolve(options);
        WordPieceEncoder encoder = WordPieceEncoder.Load(new MemoryStream(source.Vocabulary, writable: false), source.VocabularyName, options.MaxTokens);

        var sessionOptions = new SessionOptions
        {
            GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            IntraOpNumThreads = Math.Max(1, threads / sessionCount),
            InterOpNumThreads = 1,
        };
        SetThreadWaiting(sessionOptions);
        var sessions = new InferenceSession[sessionCount];
        try
        {
            for (int i = 0; i < sessionCount; i++)
                sessions[i] = CreateSession(source, sessionOptions);
            (string[] inputs, string output) = BertModelShape.Check(sessions[0], source.ModelName);
            var embedder = new OnnxEmbedder(encoder, sessionOptions, sessions, source.ModelId(PoolingName), inputs, output)
            {
                _modelName = source.ModelName,
            };
            embedder.Dimension = embedder.ProbeDimension(source.ModelName);
            return embedder;
        }
        catch
        {
            foreach (InferenceSession? session in sessions)
                session?.Dispose();
            sessionOptions.Dispose();
            throw;
        }
    }

    static InferenceSession CreateSession(EmbeddingModelSource source, SessionOptions options)
    {
        try
        {
            return new InferenceSession(source.Model, options);
        }
        catch (OnnxRuntimeException ex)
        {
            throw new EmbedderLoadException($"Embedding model '{source.ModelName}' is not a loadable ONNX model: {WordPieceEncoder.FirstLine(ex.Message)}", ex);
        }
    }
}
