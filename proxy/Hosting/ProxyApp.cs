using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Configuration;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Logging;
using Prometheus;
using RewriteProxy.Forwarding;
using RewriteProxy.Wire;

namespace RewriteProxy.Hosting;

/// <summary>Builds the web application: services, middleware and endpoints. The CLI, the demo and the tests all start it here.</summary>
public static class ProxyApp
{
    public const string DefaultUrls = "http://127.0.0.1:8080";

    public static WebApplication Build(RewriteProxyOptions options, IConfiguration configuration, string urls,
        Action<IServiceCollection>? overrides = null)
    {
        var builder = WebApplication.CreateSlimBuilder(new WebApplicationOptions { Args = [] });
        builder.Configuration.Sources.Clear();
        builder.Configuration.AddConfiguration(configuration);
        builder.WebHost.UseUrls(urls.Split(';', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries));
        builder.WebHost.ConfigureKestrel(k =>
        {
            k.AddServerHeader = false;
            k.Limits.MaxRequestBodySize = options.Limits.MaxPassthroughBytes;
            if (options.Metrics.Port > 0) k.ListenLocalhost(options.Metrics.Port);
        });

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
        services.AddHttpForwarder();
        services.AddSingleton(_ => UpstreamClient.Create(options.Upstream));
        services.AddSingleton<Passthrough>();
        overrides?.Invoke(services);

        var app = builder.Build();
        app.UseMiddleware<RequestLog>();
        MapEndpoints(app, options);
        return app;
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

        var metrics = app.MapMetrics("/metrics");
        if (options.Metrics.Port > 0) metrics.RequireHost($"*:{options.Metrics.Port}");

        app.Map("/v1/{**rest}", (HttpContext context, Passthrough passthrough) =>
            passthrough.ForwardAsync(context, context.Request.Path.Value!["/v1".Length..]));

        app.MapFallback((HttpContext context) => ErrorResponse.WriteAsync(context, StatusCodes.Status404NotFound,
            $"No route for {context.Request.Method} {context.Request.Path.Value}. RewriteProxy forwards /v1/... to the upstream " +
            "and serves lanes at /lane/{name}/v1/chat/completions.", "invalid_request_error", "not_found"));
    }

    /// <summary>The address the app actually listens on (useful with port 0).</summary>
    public static Uri BoundAddress(WebApplication app)
    {
        var addresses = app.Services.GetRequiredService<IServer>().Features.Get<IServerAddressesFeature>()!.Addresses;
        return new Uri(addresses.First());
    }
}
