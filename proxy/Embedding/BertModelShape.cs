using Microsoft.ML.OnnxRuntime;

namespace RewriteProxy.Embedding;

/// <summary>Whether an ONNX model fits as a sentence embedder: BERT's inputs, and a hidden state of rank 3 to pool.</summary>
internal static class BertModelShape
{
    /// <summary>The inputs to feed (in the model's order) and the output to pool, or why the model does not fit.</summary>
    public static (string[] Inputs, string Output) Check(InferenceSession session, string modelName)
    {
        IReadOnlyDictionary<string, NodeMetadata> inputs = session.InputMetadata;
        foreach (string required in (string[])[OnnxEmbedder.InputIds, OnnxEmbedder.AttentionMask])
        {
            if (!inputs.ContainsKey(required))
                throw new EmbedderLoadException($"Embedding model '{modelName}' has no input '{required}' (it has {string.Join(", ", inputs.Keys)}); a BERT-family model is expected.");
        }
        foreach ((string name, NodeMetadata meta) in inputs)
        {
            if (name is not (OnnxEmbedder.InputIds or OnnxEmbedder.AttentionMask or OnnxEmbedder.TokenTypeIds))
                throw new EmbedderLoadException($"Embedding model '{modelName}' needs input '{name}', which a BERT-family model does not have (expected {OnnxEmbedder.InputIds}, {OnnxEmbedder.AttentionMask}[, {OnnxEmbedder.TokenTypeIds}]).");
            if (meta.ElementDataType != Microsoft.ML.OnnxRuntime.Tensors.TensorElementType.Int64 || meta.Dimensions.Length != 2)
                throw new EmbedderLoadException($"Embedding model '{modelName}' input '{name}' is {meta.ElementDataType} of rank {meta.Dimensions.Length}; expected Int64 of rank 2 (batch, tokens).");
        }

        IReadOnlyDictionary<string, NodeMetadata> outputs = session.OutputMetadata;
        if (outputs.Count == 0)
            throw new EmbedderLoadException($"Embedding model '{modelName}' has no output.");
        string output = outputs.ContainsKey(OnnxEmbedder.HiddenState) ? OnnxEmbedder.HiddenState : outputs.Keys.First();
        NodeMetadata outputMeta = outputs[output];
        if (outputMeta.ElementDataType != Microsoft.ML.OnnxRuntime.Tensors.TensorElementType.Float || outputMeta.Dimensions.Length != 3)
            throw new EmbedderLoadException($"Embedding model '{modelName}' output '{output}' is {outputMeta.ElementDataType} of rank {outputMeta.Dimensions.Length}; expected Float of rank 3 (batch, tokens, hidden).");

        return (inputs.Keys.ToArray(), output);
    }
}
