using Microsoft.Extensions.Primitives;

namespace RewriteProxy.Lanes;

/// <summary>
/// The request Cache-Control directives a lane honours (RFC 9111 §5.2.1): <c>no-cache</c> = do not answer from the
/// cache but store the fresh result; <c>no-store</c> = neither look up nor store.
/// </summary>
public readonly record struct CacheDirectives(bool NoCache, bool NoStore)
{
    public static CacheDirectives Parse(StringValues values)
    {
        bool noCache = false, noStore = false;
        foreach (var value in values)
        {
            if (string.IsNullOrEmpty(value)) continue;
            foreach (var raw in value.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries))
            {
                var name = raw.Split('=', 2)[0].Trim();
                if (name.Equals("no-cache", StringComparison.OrdinalIgnoreCase)) noCache = true;
                else if (name.Equals("no-store", StringComparison.OrdinalIgnoreCase)) noStore = true;
            }
        }
        return new CacheDirectives(noCache, noStore);
    }
}
