using System.Text;

namespace RewriteProxy.Tests.Embedding;

/// <summary>
/// Writes tiny ONNX models byte by byte, so that load errors can be tested against real ONNX files without shipping
/// any. Field numbers follow onnx.proto of the ONNX project (from memory; ONNX Runtime loading the result confirms them).
/// </summary>
internal static class TinyOnnxModel
{
    const int Float = 1;
    const int Int64 = 7;

    /// <summary>One float input [batch, 3] passed through an Identity node.</summary>
    public static byte[] Identity(string input, string output) =>
        Model(Graph(
            Node("Identity", [input], [output], []),
            [ValueInfo(input, Float, "batch", 3)],
            [ValueInfo(output, Float, "batch", 3)]));

    /// <summary>BERT's inputs, but the output is input_ids cast to float: rank 2, where a hidden state has rank 3.</summary>
    public static byte[] IdsToFloatMatrix() =>
        Model(Graph(
            Node("Cast", ["input_ids"], ["embedding"], [IntAttribute("to", Float)]),
            [ValueInfo("input_ids", Int64, "batch", "tokens"), ValueInfo("attention_mask", Int64, "batch", "tokens")],
            [ValueInfo("embedding", Float, "batch", "tokens")]));

    /// <summary>
    /// A sentence model of any width: BERT's inputs, and a hidden state that is each word piece's row of a fixed random
    /// table (a Gather), so texts that share most of their word pieces get close mean-pooled vectors.
    /// </summary>
    /// <param name="vocabularySize">Rows of the table: the size of the vocabulary used with it.</param>
    /// <param name="width">Length of every vector.</param>
    /// <param name="seed">Seed of the table.</param>
    public static byte[] SentenceModel(int vocabularySize, int width, int seed = 7)
    {
        var random = new Random(seed);
        var table = new byte[vocabularySize * width * sizeof(float)];
        for (var i = 0; i < vocabularySize * width; i++)
            BitConverter.TryWriteBytes(table.AsSpan(i * sizeof(float)), (float)(random.NextDouble() * 2 - 1));
        var initializer = new Proto().Varint(1, (ulong)vocabularySize).Varint(1, (ulong)width).Varint(2, Float).Text(8, "table").Bytes(9, table);
        return Model(Graph(
            Node("Gather", ["table", "input_ids"], ["last_hidden_state"], []),
            [ValueInfo("input_ids", Int64, "batch", "tokens"), ValueInfo("attention_mask", Int64, "batch", "tokens")],
            [ValueInfo("last_hidden_state", Float, "batch", "tokens", width)],
            [initializer.ToArray()]));
    }

    static byte[] Model(byte[] graph)
    {
        var model = new Proto();
        model.Varint(1, 8);                                  // ir_version
        model.Bytes(8, new Proto().Varint(2, 13).ToArray()); // opset_import { version: 13 }
        model.Bytes(7, graph);                               // graph
        return model.ToArray();
    }

    static byte[] Graph(byte[] node, byte[][] inputs, byte[][] outputs, byte[][]? initializers = null)
    {
        var graph = new Proto();
        graph.Bytes(1, node);
        graph.Text(2, "tiny");
        foreach (byte[] initializer in initializers ?? [])
            graph.Bytes(5, initializer);
        foreach (byte[] input in inputs)
            graph.Bytes(11, input);
        foreach (byte[] output in outputs)
            graph.Bytes(12, output);
        return graph.ToArray();
    }

    static byte[] Node(string op, string[] inputs, string[] outputs, byte[][] attributes)
    {
        var node = new Proto();
        foreach (string input in inputs)
            node.Text(1, input);
        foreach (string output in outputs)
            node.Text(2, output);
        node.Text(4, op);
        foreach (byte[] attribute in attributes)
            node.Bytes(5, attribute);
        return node.ToArray();
    }

    static byte[] IntAttribute(string name, long value) =>
        new Proto().Text(1, name).Varint(3, (ulong)value).Varint(20, 2).ToArray(); // type INT = 2

    static byte[] ValueInfo(string name, int elementType, params object[] dims)
    {
        var shape = new Proto();
        foreach (object dim in dims)
        {
            var dimension = dim is string symbol ? new Proto().Text(2, symbol) : new Proto().Varint(1, (ulong)(int)dim);
            shape.Bytes(1, dimension.ToArray());
        }
        var tensor = new Proto().Varint(1, (ulong)elementType).Bytes(2, shape.ToArray());
        var type = new Proto().Bytes(1, tensor.ToArray());
        return new Proto().Text(1, name).Bytes(2, type.ToArray()).ToArray();
    }

    /// <summary>Protocol Buffers wire format: varint (type 0) and length-delimited (type 2) fields only.</summary>
    sealed class Proto
    {
        readonly MemoryStream _bytes = new();

        public Proto Varint(int field, ulong value)
        {
            Raw((ulong)(field << 3));
            Raw(value);
            return this;
        }

        public Proto Bytes(int field, byte[] value)
        {
            Raw((ulong)(field << 3 | 2));
            Raw((ulong)value.Length);
            _bytes.Write(value);
            return this;
        }

        public Proto Text(int field, string value) => Bytes(field, Encoding.UTF8.GetBytes(value));

        public byte[] ToArray() => _bytes.ToArray();

        void Raw(ulong value)
        {
            while (value >= 0x80)
            {
                _bytes.WriteByte((byte)(value | 0x80));
                value >>= 7;
            }
            _bytes.WriteByte((byte)value);
        }
    }
}
