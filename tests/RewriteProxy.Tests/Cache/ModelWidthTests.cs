using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Tests.Embedding;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// Embedding:ModelPath may name a model of another width than all-MiniLM-L6-v2's 384: the vector index takes its width
/// from the loaded model, so lookups and stores work (no fail-open) on every path, no-cache included.
/// </summary>
public sealed class ModelWidthTests : UpstreamAndProxy, IDisposable
{
    const int Width = 8;

    static readonly string[] Vocabulary =
        ["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]", "where", "is", "the", "pool", "today", "when", "does", "it", "open", "?"];

    readonly string _folder = Directory.CreateTempSubdirectory("model-width-").FullName;

    protected override bool StartsProxy => false;

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    [Fact]
    public async Task A_model_of_another_width_serves_exact_and_semantic_hits_and_stores_on_no_cache()
    {
        var model = Path.Combine(_folder, "tiny.onnx");
        var vocabulary = Path.Combine(_folder, "vocab.txt");
        File.WriteAllBytes(model, TinyOnnxModel.SentenceModel(Vocabulary.Length, Width));
        File.WriteAllLines(vocabulary, Vocabulary);
        var embedding = new EmbeddingOptions { ModelPath = model, VocabPath = vocabulary };
        await using var proxy = await StartProxyAsync(new Dictionary<string, string?>
            {
                ["Embedding:ModelPath"] = model,
                ["Embedding:VocabPath"] = vocabulary,
                ["Lanes:draft:MaxDrift"] = "2",
            },
            // In place of the suite's shared MiniLM: the model the settings name.
            services => services.AddSingleton<IEmbedder>(_ => OnnxEmbedder.Load(embedding)));

        var miss = await proxy.AskAsync("draft", "Where is the pool?");
        var exact = await proxy.AskAsync("draft", "Where is the pool?");
        // Not "... today?": the hit decision reads an added time frame as another question.
        var semantic = await proxy.AskAsync("draft", "Where is the pool please?");
        var fresh = await proxy.AskAsync("draft", "When does it open?", cacheControl: "no-cache");
        var stored = await proxy.AskAsync("draft", "When does it open?");

        Assert.Equal(Width, proxy.Services.GetRequiredService<IEmbedder>().Dimension);
        Assert.Equal(Width, proxy.Services.GetRequiredService<VectorIndex>().Dimensions);
        Assert.Equal(["miss", "hit-exact", "hit-semantic", "miss", "hit-exact"],
            new[] { miss.Cache, exact.Cache, semantic.Cache, fresh.Cache, stored.Cache });
        Assert.All(new[] { miss, exact, semantic, fresh, stored }, r => Assert.Equal(200, r.Status));
        Assert.Equal(2, Upstream.ChatCalls);
    }

    public void Dispose() => Directory.Delete(_folder, recursive: true);
}
