using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.Configuration;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>The real proxy app on 127.0.0.1 with a random port, configured from a dictionary.</summary>
public sealed class TestProxy : IAsyncDisposable
{
    readonly WebApplication _app;

    public Uri Root { get; }
    public Uri BaseUrl => new(Root, "v1/");
    public HttpClient Client { get; }
    public RewriteProxyOptions Options { get; }
    public IServiceProvider Services => _app.Services;

    TestProxy(WebApplication app, RewriteProxyOptions options)
    {
        _app = app;
        Options = options;
        Root = ProxyApp.BoundAddress(app);
        Client = new HttpClient { BaseAddress = Root, Timeout = TimeSpan.FromSeconds(60) };
    }

    /// <summary>A fresh folder for one proxy's store; removed by the caller or left in /tmp.</summary>
    public static string NewStorePath() =>
        Path.Combine(Path.GetTempPath(), "rewriteproxy-tests", Guid.NewGuid().ToString("N"), "cache.db");

    public static IConfigurationRoot Configuration(Uri upstream, IDictionary<string, string?>? settings = null)
    {
        var values = new Dictionary<string, string?>
        {
            ["Upstream:BaseUrl"] = upstream.ToString(),
            ["Store:Path"] = NewStorePath(),
            ["Logging:LogLevel:Default"] = "Warning",
            ["Lanes:draft:Kind"] = "draft",
            ["Lanes:siblings:Kind"] = "siblings",
        };
        if (settings is not null)
            foreach (var (k, v) in settings) values[k] = v;
        return new ConfigurationBuilder().AddInMemoryCollection(values).Build();
    }

    public static async Task<TestProxy> StartAsync(Uri upstream, IDictionary<string, string?>? settings = null,
        Action<IServiceCollection>? overrides = null)
    {
        var configuration = Configuration(upstream, settings);
        var (options, errors) = OptionsReader.Read(configuration);
        if (options is null) throw new InvalidOperationException(string.Join("\n", errors));
        var app = ProxyApp.Build(options, configuration, "http://127.0.0.1:0", services =>
        {
            SharedEmbedder.Use(services);
            overrides?.Invoke(services);
        });
        await app.StartAsync();
        // The index is rebuilt in the background; tests that restart a proxy expect semantic hits at once.
        var follower = app.Services.GetRequiredService<RewriteProxy.Cache.IndexFollower>();
        var waited = System.Diagnostics.Stopwatch.StartNew();
        while (!follower.Ready && waited.Elapsed < TimeSpan.FromSeconds(20)) await Task.Delay(10);
        return new TestProxy(app, options);
    }

    public async ValueTask DisposeAsync()
    {
        Client.Dispose();
        await _app.StopAsync();
        await _app.DisposeAsync();
    }
}
