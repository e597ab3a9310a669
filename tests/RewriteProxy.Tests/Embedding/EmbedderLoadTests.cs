using RewriteProxy.Embedding;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Embedding;

public sealed class EmbedderLoadTests : IDisposable
{
    readonly string _folder = Directory.CreateTempSubdirectory("embedder-load-").FullName;

    [Fact]
    public void Missing_model_file_is_one_clear_load_error_naming_the_path()
    {
        string model = Path.Combine(_folder, "absent.onnx");
        string vocabulary = WriteVocabulary();

        var error = Assert.Throws<EmbedderLoadException>(() => OnnxEmbedder.Load(new EmbeddingOptions { ModelPath = model, VocabPath = vocabulary }));

        Assert.Contains(model, error.Message);
        Assert.Contains("does not exist", error.Message);
        Assert.DoesNotContain('\n', error.Message);
    }

    [Fact]
    public void Model_path_without_vocabulary_path_is_a_load_error()
    {
        string model = Path.Combine(_folder, "model.onnx");
        File.WriteAllBytes(model, [1, 2, 3]);

        var error = Assert.Throws<EmbedderLoadException>(() => OnnxEmbedder.Load(new EmbeddingOptions { ModelPath = model }));

        Assert.Contains(model, error.Message);
        Assert.Contains("VocabPath", error.Message);
    }

    [Fact]
    public void File_that_is_not_onnx_is_one_clear_load_error()
    {
        string model = Path.Combine(_folder, "notes.onnx");
        File.WriteAllText(model, "This is a text file about the Riverton water utility, not a model.");

        var error = Assert.Throws<EmbedderLoadException>(() => OnnxEmbedder.Load(new EmbeddingOptions { ModelPath = model, VocabPath = WriteVocabulary() }));

        Assert.Contains(model, error.Message);
        Assert.Contains("not a loadable ONNX model", error.Message);
        Assert.DoesNotContain('\n', error.Message);
    }

    // Outside source: ONNX Runtime itself loads the hand-written model (an ONNX Identity graph, protobuf layout of
    // onnx.proto), so the model is valid ONNX; only its inputs do not fit a BERT-family model.
    [Fact]
    public void Onnx_model_without_bert_inputs_is_a_load_error_naming_what_is_missing()
    {
        string model = Path.Combine(_folder, "identity.onnx");
        File.WriteAllBytes(model, TinyOnnxModel.Identity("pixels", "scores"));

        var error = Assert.Throws<EmbedderLoadException>(() => OnnxEmbedder.Load(new EmbeddingOptions { ModelPath = model, VocabPath = WriteVocabulary() }));

        Assert.Contains(model, error.Message);
        Assert.Contains("input_ids", error.Message);
        Assert.DoesNotContain('\n', error.Message);
    }

    [Fact]
    public void Bert_inputs_with_an_output_of_the_wrong_rank_is_a_load_error()
    {
        string model = Path.Combine(_folder, "flat.onnx");
        File.WriteAllBytes(model, TinyOnnxModel.IdsToFloatMatrix());

        var error = Assert.Throws<EmbedderLoadException>(() => OnnxEmbedder.Load(new EmbeddingOptions { ModelPath = model, VocabPath = WriteVocabulary() }));

        Assert.Contains(model, error.Message);
        Assert.Contains("rank 2", error.Message);
    }

    string WriteVocabulary()
    {
        string path = Path.Combine(_folder, "vocab.txt");
        File.WriteAllLines(path, ["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]", "water", "meter"]);
        return path;
    }

    public void Dispose() => Directory.Delete(_folder, recursive: true);
}
