using System.Buffers;
using System.Collections.Concurrent;
using System.Diagnostics;
using System.Numerics.Tensors;
using System.Runtime;
using Microsoft.Extensions.Logging;
using Microsoft.ML.OnnxRuntime;
using RewriteProxy.Telemetry;
using SessionOptions = Microsoft.ML.OnnxRuntime.SessionOptions;

namespace RewriteProxy.Embedding;

/// <summary>
/// Sentence vectors from a BERT-family ONNX model (default all-MiniLM-L6-v2): WordPiece ids, one model run per call,
/// mean of the last hidden state over the attended tokens, L2 normalisation. Safe for concurrent callers.
/// </summary>
public sealed partial class OnnxEmbedder : IEmbedder, IDisposable
{
    /// <summary>Pooling of token states into one vector; part of <see cref="ModelId"/>.</summary>
    internal const string PoolingName = "mean";

    internal const string InputIds = "input_ids";
    internal const string AttentionMask = "attention_mask";
    internal const string TokenTypeIds = "token_type_ids";
    internal const string HiddenState = "last_hidden_state";

    /// <summary>Guards the division of a vector by its length; the value sentence-transformers' normalize uses (from memory).</summary>
    const float NormFloor = 1e-12f;

    readonly WordPieceEncoder _encoder;
    readonly SessionOptions _sessionOptions;
    readonly InferenceSession[] _sessions;
    readonly ConcurrentBag<InferenceSession> _idle;
    readonly SemaphoreSlim? _turns;
    readonly RunOptions _runOptions = new();
    readonly string[] _inputNames;
    readonly string[] _outputNames;
    readonly bool _feedsTokenTypes;

    OnnxEmbedder(WordPieceEncoder encoder, SessionOptions sessionOptions, InferenceSession[] sessions, string modelId,
        string[] inputNames, string outputName)
    {
        _encoder = encoder;
        _sessionOptions = sessionOptions;
        _sessions = sessions;
        _idle = new ConcurrentBag<InferenceSession>(sessions);
        _turns = sessions.Length > 1 ? new SemaphoreSlim(sessions.Length, sessions.Length) : null;
        ModelId = modelId;
        _inputNames = inputNames;
        _outputNames = [outputName];
        _feedsTokenTypes = inputNames.Contains(TokenTypeIds);
    }

    public string ModelId { get; }

    public int Dimension { get; private set; }

    /// <summary>Word pieces per text, [CLS] and [SEP] included.</summary>
    public int MaxTokens => _encoder.MaxTokens;

    string _modelName = "";

    public float[] Embed(string text) => Embed([text])[0];

    public float[][] Embed(IReadOnlyList<string> texts)
    {
        ArgumentNullException.ThrowIfNull(texts);
        var vectors = new float[texts.Count][];
        var pieces = new IReadOnlyList<int>?[texts.Count];
        int rows = 0, longest = 0;
        for (int i = 0; i < texts.Count; i++)
        {
            pieces[i] = _encoder.Encode(texts[i] ?? "");
            if (pieces[i] is { } ids)
            {
                rows++;
                longest = Math.Max(longest, ids.Count);
            }
            else
            {
                vectors[i] = new float[Dimension];
            }
        }
        if (rows > 0)
            Run(pieces, rows, longest, hidden => Pool(hidden, pieces, longest, vectors));
        return vectors;
    }

    /// <summary>One model run over the texts that have pieces, padded to the longest; hands the hidden state to
    /// <paramref name="read"/> (<see cref="Pool"/> for sentence vectors, the per-word states in OnnxEmbedder.Tokens.cs).</summary>
    void Run(IReadOnlyList<int>?[] pieces, int rows, int longest, Action<OrtValue> read)
    {
        int cells = rows * longest;
        long[] ids = ArrayPool<long>.Shared.Rent(cells);
        long[] mask = ArrayPool<long>.Shared.Rent(cells);
        long[]? types = _feedsTokenTypes ? ArrayPool<long>.Shared.Rent(cells) : null;
        try
        {
            long padding = _encoder.PaddingId;
            int row = 0;
            foreach (IReadOnlyList<int>? textPieces in pieces)
            {
                if (textPieces is null)
                    continue;
                int offset = row * longest;
                for (int t = 0; t < textPieces.Count; t++)
                {
                    ids[offset + t] = textPieces[t];
                    mask[offset + t] = 1;
                }
                ids.AsSpan(offset + textPieces.Count, longest - textPieces.Count).Fill(padding);
                mask.AsSpan(offset + textPieces.Count, longest - textPieces.Count).Clear();
                row++;
            }
            types?.AsSpan(0, cells).Clear();

            long[] shape = [rows, longest];
            using var inputs = new InputValues(_inputNames.Length);
            for (int i = 0; i < _inputNames.Length; i++)
            {
                long[] data = _inputNames[i] switch { InputIds => ids, AttentionMask => mask, _ => types! };
                inputs.Values[i] = OrtValue.CreateTensorValueFromMemory(OrtMemoryInfo.DefaultInstance, data.AsMemory(0, cells), shape);
            }

            InferenceSession session = TakeSession();
            try
            {
                long started = Stopwatch.GetTimestamp();
                using IDisposableReadOnlyCollection<OrtValue> outputs = session.Run(_runOptions, _inputNames, inputs.Values, _outputNames);
                ProxyMetrics.EmbedDuration.Observe(Stopwatch.GetElapsedTime(started).TotalSeconds);
                read(outputs[0]);
            }
            finally
            {
                ReturnSession(session);
            }
        }
        finally
        {
            ArrayPool<long>.Shared.Return(ids);
            ArrayPool<long>.Shared.Return(mask);
            if (types is not null)
                ArrayPool<long>.Shared.Return(types);
        }
    }

    /// <summary>Mean of the hidden states of each text's own tokens (padding is masked out), then L2 normalisation.</summary>
    void Pool(OrtValue hidden, IReadOnlyList<int>?[] pieces, int longest, float[][] vectors)
    {
        ReadOnlySpan<float> states = hidden.GetTensorDataAsSpan<float>();
        int dimension = (int)hidden.GetTensorTypeAndShape().Shape[2];
        int row = 0;
        for (int i = 0; i < pieces.Length; i++)
        {
            if (pieces[i] is not { } textPieces)
                continue;
            var vector = new float[dimension];
            ReadOnlySpan<float> rowStates = states.Slice(row * longest * dimension, textPieces.Count * dimension);
            for (int t = 0; t < textPieces.Count; t++)
                TensorPrimitives.Add(vector, rowStates.Slice(t * dimension, dimension), vector);
            TensorPrimitives.Divide(vector, textPieces.Count, vector);
            float norm = TensorPrimitives.Norm(vector);
            TensorPrimitives.Divide(vector, MathF.Max(norm, NormFloor), vector);
            vectors[i] = vector;
            row++;
        }
    }

    InferenceSession TakeSession()
    {
        if (_turns is null)
            return _sessions[0];
        _turns.Wait();
        _idle.TryTake(out InferenceSession? session);
        return session!;
    }

    void ReturnSession(InferenceSession session)
    {
        if (_turns is null)
            return;
        _idle.Add(session);
        _turns.Release();
    }

    /// <summary>Runs the model once (warming it up) and returns the length of its vectors.</summary>
    int ProbeDimension(string modelName)
    {
        float[] probe;
        try
        {
            const string probeText = "dimension probe";
            IReadOnlyList<int>?[] pieces = [_encoder.Encode(probeText)!];
            var vectors = new float[1][];
            int longest = pieces[0]!.Count;
            Run(pieces, rows: 1, longest, hidden => Pool(hidden, pieces, longest, vectors));
            probe = vectors[0];
        }
        catch (OnnxRuntimeException ex)
        {
            throw new EmbedderLoadException($"Embedding model '{modelName}' fails on a one-sentence batch: {WordPieceEncoder.FirstLine(ex.Message)}", ex);
        }
        if (probe.Length == 0)
            throw new EmbedderLoadException($"Embedding model '{modelName}' gives vectors of length 0.");
        return probe.Length;
    }

    public void Dispose()
    {
        foreach (InferenceSession session in _sessions)
            session.Dispose();
        _sessionOptions.Dispose();
        _runOptions.Dispose();
        _turns?.Dispose();
    }

    /// <summary>The OrtValues of one run, disposed together.</summary>
    readonly struct InputValues(int count) : IDisposable
    {
        public OrtValue[] Values { get; } = new OrtValue[count];

        public void Dispose()
        {
            foreach (OrtValue? value in Values)
                value?.Dispose();
        }
    }
}
