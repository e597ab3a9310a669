using Microsoft.Extensions.DependencyInjection;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>
/// A test class's pair: a scripted upstream and the real proxy in front of it, fresh for every test. A class whose
/// tests each need a proxy of their own settings turns the shared one off (<see cref="StartsProxy"/>) and calls
/// <see cref="StartProxyAsync"/>.
/// </summary>
public abstract class UpstreamAndProxy : IAsyncLifetime
{
    TestProxy? _proxy;

    protected ScriptedUpstream Upstream { get; private set; } = null!;

    /// <summary>The proxy every test starts with, configured by <see cref="Settings"/>.</summary>
    protected TestProxy Proxy => _proxy ?? throw new InvalidOperationException($"{GetType().Name} starts its proxies itself (StartProxyAsync).");

    /// <summary>False when each test starts its own proxies.</summary>
    protected virtual bool StartsProxy => true;

    /// <summary>Settings of the proxy, beyond TestProxy's defaults.</summary>
    protected virtual IDictionary<string, string?>? Settings => null;

    /// <summary>Sets up the upstream's script before the proxy starts.</summary>
    protected virtual void Script(ScriptedUpstream upstream) { }

    /// <summary>Another proxy in front of the same upstream, with settings of its own; the caller disposes it.</summary>
    protected Task<TestProxy> StartProxyAsync(IDictionary<string, string?>? settings = null, Action<IServiceCollection>? overrides = null) =>
        TestProxy.StartAsync(Upstream.BaseUrl, settings, overrides);

    public async Task InitializeAsync()
    {
        Upstream = await ScriptedUpstream.StartAsync();
        Script(Upstream);
        if (StartsProxy) _proxy = await StartProxyAsync(Settings);
    }

    public async Task DisposeAsync()
    {
        if (_proxy is not null) await _proxy.DisposeAsync();
        await Upstream.DisposeAsync();
    }
}
