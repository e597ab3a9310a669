namespace RewriteProxy.Tests.Fixtures;

/// <summary>A test class's pair: a scripted upstream and the real proxy in front of it, fresh for every test.</summary>
public abstract class UpstreamAndProxy : IAsyncLifetime
{
    protected ScriptedUpstream Upstream { get; private set; } = null!;
    protected TestProxy Proxy { get; private set; } = null!;

    /// <summary>Settings of the proxy, beyond TestProxy's defaults.</summary>
    protected virtual IDictionary<string, string?>? Settings => null;

    /// <summary>Sets up the upstream's script before the proxy starts.</summary>
    protected virtual void Script(ScriptedUpstream upstream) { }

    public async Task InitializeAsync()
    {
        Upstream = await ScriptedUpstream.StartAsync();
        Script(Upstream);
        Proxy = await TestProxy.StartAsync(Upstream.BaseUrl, Settings);
    }

    public async Task DisposeAsync()
    {
        await Proxy.DisposeAsync();
        await Upstream.DisposeAsync();
    }
}
