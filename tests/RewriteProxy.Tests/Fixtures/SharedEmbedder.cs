using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>One loaded model for every test proxy in the run: loading it per proxy would dominate the suite's time.</summary>
public static class SharedEmbedder
{
    static readonly Lazy<IEmbedder> Model = new(() => CachingEmbedder.Over(OnnxEmbedder.Load(new EmbeddingOptions()), 4096));

    public static IEmbedder Instance => Model.Value;

    /// <summary>A service override that puts the shared model in place of a fresh load.</summary>
    public static void Use(IServiceCollection services) => services.AddSingleton(Instance);
}
