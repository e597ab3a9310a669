using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Configuration;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Logging;
using Prometheus;
using RewriteProxy.Cache;
using RewriteProxy.Cache.Snapshots;
using RewriteProxy.Embedding;
using RewriteProxy.Forwarding;
using RewriteProxy.Lanes;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;

namespace RewriteProxy.Hosting;

/// <summary>Builds the web application: services, middleware and endpoints. The CLI, the demo and the tests all start it here.</summary>
public static class ProxyApp
{
    public const string DefaultUrls = "http://127.0.0.1:8080";

    public static WebApplication Build(RewriteProxyOptions options, IConfiguration configuration, string urls,
        Action<IServiceCollection>? overrides = null)
    {
        // The builder's own appsettings.json sources (cleared below) would watch the working directory, every folder
        // under it, for changes: 1 897 inotify watches when started from this repository, measured. The proxy reads its
        // configuration once (ConfigurationLoader), so nothing is watched.
        var builder = WebApplication.CreateSlimBuilder(new WebApplicationOptions { Args = ["--hostBuilder:reloadConfigOnChange=false"] });
        builder.Configuration.Sources.Clear();
        builder.Configuration.AddConfiguration(configuration);
        var listen = urls.Split(';', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries).ToList();
        // A Listen* call in ConfigureKestrel would replace these URLs, so the metrics port joins them instead.
        if (options.Metrics.Port > 0) listen.Add($"http://127.0.0.1:{options.Metrics.Port}");
        builder.WebHost.UseUrls([.. listen]);
        builder.WebHost.ConfigureKestrel(k =>
        {
            k.AddServerHeader = false;
            k.Limits.MaxRequestBodySize = options.Limits.MaxPassthroughBytes;
        });
        DefaultMetrics.UseLintClean();

        builder.Logging.ClearProviders();
        builder.Logging.AddConfiguration(configuration.GetSection("Logging"));
        builder.Logging.AddSimpleConsole(o =>
        {
            o.SingleLine = true;
            o.UseUtcTimestamp = true;
            o.TimestampFormat = "yyyy-MM-ddTHH:mm:ss.fffZ ";
        });

        var services = builder.Services;
        services.AddSingleton(options);
        services.AddSingleton<Readiness>();
        services.AddSingleton<IdleTrim>();
        services.AddHostedService(sp => sp.GetRequiredService<IdleTrim>());
        services.AddHttpForwarder();
        services.AddSingleton(_ => UpstreamClient.Create(options.Upstream));
        services.AddSingleton<Passthrough>();
        services.AddSingleton<LaneUpstream>();
        services.AddSingleton<RewriteFlow>();
        services.AddSingleton<LaneRouter>();
        services.AddSingleton<QuestionFinder>();
        services.AddSingleton<FailOpenLog>();
        services.AddSingleton<LaneTally>();
        services.AddSingleton<IEmbedder>(sp =>
            CachingEmbedder.Over(OnnxEmbedder.Load(options.Embedding, sp.GetRequiredService<ILoggerFactory>().CreateLogger("embedding")),
                options.Embedding.CacheSize));
        // As wide as the loaded model's vectors: Embedding:ModelPath may name a model of another width.
        services.AddSingleton(sp => new VectorIndex(sp.GetRequiredService<IEmbedder>().Dimension));
        services.AddSingleton(_ => new AnchorGuard());
        services.AddSingleton(sp => StoreFactory.Create(options.Store, options.Events, sp.GetRequiredService<ILoggerFactory>()));
        services.AddSingleton(_ => new HotEntries());
        services.AddSingleton(sp => new IndexFollower(sp.GetRequiredService<IRewriteStore>(), sp.GetRequiredService<VectorIndex>(),
            sp.GetRequiredService<HotEntries>(), sp.GetRequiredService<IEmbedder>().ModelId,
            sp.GetRequiredService<ILoggerFactory>().CreateLogger("cache")));
        services.AddSingleton(sp => new IndexSnapshots(sp.GetRequiredService<IRewriteStore>(), sp.GetRequiredService<VectorIndex>(),
            sp.GetRequiredService<IndexFollower>(), sp.GetRequiredService<IEmbedder>().ModelId, options.Store,
            sp.GetRequiredService<ILoggerFactory>().CreateLogger("cache")));
        // A hosted service for its stop: a graceful shutdown saves the index.
        services.AddHostedService(sp => sp.GetRequiredService<IndexSnapshots>());
        services.AddSingleton(sp => new SemanticCache(sp.GetRequiredService<IRewriteStore>(), sp.GetRequiredService<VectorIndex>(),
            sp.GetRequiredService<HotEntries>(), sp.GetRequiredService<IEmbedder>(), sp.GetRequiredService<AnchorGuard>(),
            sp.GetRequiredService<LaneTally>(), options.Store));
        services.AddSingleton<IRewriteCache>(sp => sp.GetRequiredService<SemanticCache>());
        services.AddSingleton<EntryGauge>();
        overrides?.Invoke(services);

        var app = builder.Build();
        StartCache(app, options);
        app.Use(app.Services.GetRequiredService<IdleTrim>().TrackAsync);
        app.UseMiddleware<RequestLog>();
        MapEndpoints(app, options);
        return app;
    }

    /// <summary>Loads the model and opens the store before listening: a bad model or store path is one clear start-up error.</summary>
    static void StartCache(WebApplication app, RewriteProxyOptions options)
    {
        var readiness = app.Services.GetRequiredService<Readiness>();
        readiness.Expect("cache");
        try
        {
            app.Services.GetRequiredService<SemanticCache>();
            // The index snapshot is read while the store opens: at 1M entries both take seconds.
            var snapshots = app.Services.GetRequiredService<IndexSnapshots>();
            snapshots.BeginReading();
            var store = app.Services.GetRequiredService<IRewriteStore>();
            // Before listening, so a store that cannot be opened is one start-up error; start-up may wait on it.
            store.OpenAsync(StoreAccess.ReadWrite, CancellationToken.None).GetAwaiter().GetResult();
            app.Services.GetRequiredService<QuestionFinder>().LoadTemplatesAsync(CancellationToken.None).GetAwaiter().GetResult();
            // The index is loaded from its snapshot, or rebuilt, in the background: exact hits work meanwhile.
            app.Lifetime.ApplicationStarted.Register(() => _ = snapshots.StartFollowingAsync());
        }
        catch (EmbedderLoadException e)
        {
            throw new StartupException($"embedding model: {e.Message}", e);
        }
        catch (StoreException e)
        {
            throw new StartupException($"store: {e.Message} ({StoreFactory.WhereKey(options.Store)})", e);
        }
        ProxyMetrics.Declare(options.Lanes.Values);
        var gauge = app.Services.GetRequiredService<EntryGauge>();
        gauge.Register();
        app.Lifetime.ApplicationStopping.Register(gauge.Stop);
        // Everything loaded before listening (model, WordNet tables, store, templates) left its parsing garbage on
        // the large object heap: 25 MB of fragmentation and 117 MB committed for 47 MB live, measured.
        HeapCompaction.Now();
        readiness.Ready("cache");
    }

    static void MapEndpoints(WebApplication app, RewriteProxyOptions options)
    {
        app.MapGet("/healthz", () => Results.Text("ok\n"));
        app.MapGet("/readyz", (Readiness readiness) =>
        {
            var pending = readiness.Pending();
            return pending.Count == 0
                ? Results.Text("ready\n")
                : Results.Json(new { ready = false, pending }, statusCode: StatusCodes.Status503ServiceUnavailable);
        });

        Admin.AdminEndpoints.Map(app, options);

        var metrics = app.MapMetrics("/metrics");
        if (options.Metrics.Port > 0) metrics.RequireHost($"*:{options.Metrics.Port}");

        LaneEndpoints.Map(app, options);

        app.MapFallback(LaneEndpoints.NoRouteAsync);
    }

    /// <summary>The address the app actually listens on (useful with port 0).</summary>
    public static Uri BoundAddress(WebApplication app)
    {
        var addresses = app.Services.GetRequiredService<IServer>().Features.Get<IServerAddressesFeature>()!.Addresses;
        var metricsPort = app.Services.GetService<RewriteProxyOptions>()?.Metrics.Port ?? 0;
        return addresses.Select(a => new Uri(a)).First(u => u.Port != metricsPort);
    }
}
