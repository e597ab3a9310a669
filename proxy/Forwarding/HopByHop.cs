namespace RewriteProxy.Forwarding;

/// <summary>
/// RFC 9110 §7.6.1: a proxy removes the Connection field and every field it names. YARP removes the fixed
/// hop-by-hop set (Connection, Keep-Alive, TE, Transfer-Encoding, Upgrade, Proxy-*); this adds the named ones.
/// </summary>
public static class HopByHop
{
    public static IEnumerable<string> NamedByConnection(IEnumerable<string?> connectionValues)
    {
        foreach (var value in connectionValues)
        {
            if (string.IsNullOrEmpty(value)) continue;
            foreach (var token in value.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries))
                if (!token.Equals("close", StringComparison.OrdinalIgnoreCase) && !token.Equals("keep-alive", StringComparison.OrdinalIgnoreCase))
                    yield return token;
        }
    }
}
