namespace RewriteProxy.Hosting;

/// <summary>What <c>/readyz</c> reports: each part of the cache side says when it is ready.</summary>
public sealed class Readiness
{
    readonly Dictionary<string, string?> _parts = new(StringComparer.Ordinal);

    /// <summary>Declares a part that must become ready before the proxy is.</summary>
    public void Expect(string part)
    {
        lock (_parts) _parts.TryAdd(part, "starting");
    }

    public void Ready(string part)
    {
        lock (_parts) _parts[part] = null;
    }

    public void NotReady(string part, string why)
    {
        lock (_parts) _parts[part] = why;
    }

    /// <summary>Parts not yet ready, with why; empty when ready.</summary>
    public IReadOnlyDictionary<string, string> Pending()
    {
        lock (_parts) return _parts.Where(p => p.Value is not null).ToDictionary(p => p.Key, p => p.Value!);
    }
}
