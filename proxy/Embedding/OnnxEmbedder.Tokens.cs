using System.Numerics.Tensors;
using Microsoft.ML.OnnxRuntime;

namespace RewriteProxy.Embedding;

/// <summary>The per-word states behind the sentence vector (<see cref="TokenStates"/>): the same model run, not pooled.</summary>
public sealed partial class OnnxEmbedder : ITokenEmbedder
{
    public TokenStates[] EmbedTokens(IReadOnlyList<string> texts)
    {
        ArgumentNullException.ThrowIfNull(texts);
        // Encoded as Embed encodes (a text with nothing to embed has no pieces and no words); kept apart from Embed so that
        // the sentence path is untouched.
        IReadOnlyList<int>?[] pieces = texts.Select(t => _encoder.Encode(t ?? "")).ToArray();
        var states = pieces.Select(p => p is null ? TokenStates.Empty : null!).ToArray();
        int rows = pieces.Count(p => p is not null), longest = pieces.Max(p => p?.Count ?? 0);
        if (rows > 0)
            Run(pieces, rows, longest, hidden => ReadStates(hidden, texts, pieces, longest, states));
        return states;
    }

    /// <summary>Each text's words, and the mean of each word's pieces (in order after [CLS]), L2-normalised.</summary>
    void ReadStates(OrtValue hidden, IReadOnlyList<string> texts, IReadOnlyList<int>?[] pieces, int longest, TokenStates[] states)
    {
        ReadOnlySpan<float> all = hidden.GetTensorDataAsSpan<float>();
        int dimension = (int)hidden.GetTensorTypeAndShape().Shape[2];
        int row = 0;
        for (int i = 0; i < pieces.Length; i++)
        {
            if (pieces[i] is not { } textPieces)
                continue;
            ReadOnlySpan<float> rowStates = all.Slice(row * longest * dimension, textPieces.Count * dimension);
            string[] words = BertTextNormalizer.Normalize(texts[i]).Split(' ', StringSplitOptions.RemoveEmptyEntries);
            var vectors = new float[]?[words.Length];
            // Piece 0 is [CLS]; the last is [SEP].
            int piece = 1;
            for (int w = 0; w < words.Length; w++)
            {
                int count = _encoder.PieceCount(words[w]);
                if (count == 0 || piece + count > textPieces.Count - 1)
                    break;
                var vector = new float[dimension];
                for (int t = piece; t < piece + count; t++)
                    TensorPrimitives.Add(vector, rowStates.Slice(t * dimension, dimension), vector);
                TensorPrimitives.Divide(vector, MathF.Max(TensorPrimitives.Norm(vector), NormFloor), vector);
                vectors[w] = vector;
                piece += count;
            }
            states[i] = new TokenStates(words, vectors);
            row++;
        }
    }
}
