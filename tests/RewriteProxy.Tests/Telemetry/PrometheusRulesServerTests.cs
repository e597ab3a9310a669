using System.Globalization;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using Microsoft.AspNetCore.Http;
using Microsoft.AspNetCore.Http.Features;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Logging;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Telemetry;

/// <summary>
/// A real Prometheus server (Debian package `prometheus`, /usr/bin/prometheus) scraping a small exposition
/// endpoint served by Kestrel on loopback: proves the <see cref="PrometheusServer"/> fixture, and that the server
/// itself loads our rule files and computes a recorded ratio from scraped counters.
/// </summary>
public sealed class PrometheusRulesServerTests
{
    /// <summary>Upper bound for each test: start, a few 1-second scrapes and rule evaluations, stop.</summary>
    static readonly TimeSpan TestBudget = TimeSpan.FromSeconds(30);

    [Fact]
    public async Task Prometheus_fixture_scrapes_a_static_endpoint_and_answers_a_query()
    {
        using var budget = new CancellationTokenSource(TestBudget);
        // Text exposition format 0.0.4, as the Prometheus project documents it.
        const string exposition =
            "# HELP rewriteproxy_entries Entries in the cache.\n" +
            "# TYPE rewriteproxy_entries gauge\n" +
            "rewriteproxy_entries{lane=\"draft\"} 42\n" +
            "rewriteproxy_entries{lane=\"siblings\"} 7\n";
        await using var endpoint = await ExpositionEndpoint.StartAsync(_ => exposition, budget.Token);
        await using var prometheus = await PrometheusServer.StartAsync(endpoint.HostAndPort, cancellationToken: budget.Token);

        var draft = await prometheus.WaitForValueAsync("rewriteproxy_entries{lane=\"draft\",job=\"rewriteproxy\"}", budget.Token);

        Assert.True(draft is not null, $"no sample within {TestBudget}; server log:\n{prometheus.Log}");
        Assert.Equal(42, draft);
        Assert.Equal(7, await prometheus.QueryScalarAsync("rewriteproxy_entries{lane=\"siblings\"}", budget.Token));
        Assert.Null(await prometheus.QueryScalarAsync("rewriteproxy_entries{lane=\"absent\"}", budget.Token));
        Assert.Equal(49, await prometheus.QueryScalarAsync("sum(rewriteproxy_entries)", budget.Token));
    }

    [Fact]
    public async Task Live_prometheus_records_the_hit_ratio_without_bypass_from_scraped_counters()
    {
        using var budget = new CancellationTokenSource(TestBudget);
        // Every scrape sees 3 more exact hits, 1 more miss and 4 more bypasses: the ratio is 3/4 whatever
        // the timing, since all counters grow in step (rate() extrapolates them by the same factor).
        var exposition = (long scrape) =>
            "# TYPE rewriteproxy_lookups_total counter\n" +
            Line("hit_exact", 3 * scrape) + Line("miss", 1 * scrape) + Line("bypass", 4 * scrape);
        await using var endpoint = await ExpositionEndpoint.StartAsync(exposition, budget.Token);
        var rules = new[] { "recording.rules.yml", "alerts.rules.yml" }.Select(f => Path.Combine(PromTools.PrometheusConfigDirectory, f));
        await using var prometheus = await PrometheusServer.StartAsync(endpoint.HostAndPort, rules, budget.Token);

        var ratio = await prometheus.WaitForValueAsync("lane:rewriteproxy_hit_ratio:rate5m{lane=\"draft\"}", budget.Token);

        Assert.True(ratio is not null, $"no recorded ratio within {TestBudget}; server log:\n{prometheus.Log}");
        Assert.Equal(0.75, ratio!.Value, 1e-9);

        static string Line(string result, long value) =>
            $"rewriteproxy_lookups_total{{lane=\"draft\",result=\"{result}\"}} {value.ToString(CultureInfo.InvariantCulture)}\n";
    }

    /// <summary>Kestrel on 127.0.0.1 and a free port, serving /metrics from a function of the scrape number.</summary>
    sealed class ExpositionEndpoint : IAsyncDisposable
    {
        readonly WebApplication _app;

        ExpositionEndpoint(WebApplication app, string hostAndPort)
        {
            _app = app;
            HostAndPort = hostAndPort;
        }

        public string HostAndPort { get; }

        public static async Task<ExpositionEndpoint> StartAsync(Func<long, string> body, CancellationToken cancellationToken)
        {
            var builder = WebApplication.CreateSlimBuilder();
            builder.WebHost.UseUrls("http://127.0.0.1:0");
            builder.Logging.ClearProviders();
            var app = builder.Build();
            long scrapes = 0;
            app.MapGet("/metrics", () =>
                Results.Text(body(Interlocked.Increment(ref scrapes)), "text/plain; version=0.0.4; charset=utf-8"));
            await app.StartAsync(cancellationToken);
            var address = new Uri(app.Services.GetRequiredService<IServer>().Features.GetRequiredFeature<IServerAddressesFeature>().Addresses.Single());
            return new ExpositionEndpoint(app, $"{address.Host}:{address.Port}");
        }

        public async ValueTask DisposeAsync()
        {
            await _app.StopAsync();
            await _app.DisposeAsync();
        }
    }
}
