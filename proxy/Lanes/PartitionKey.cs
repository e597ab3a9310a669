using System.Security.Cryptography;
using System.Text;
using Microsoft.AspNetCore.Http;

namespace RewriteProxy.Lanes;

/// <summary>
/// The tenant boundary of a lane call. In <c>credential</c> mode it is a SHA-256 over every credential header the call
/// carries (<see cref="PartitionOptions.CredentialHeaders"/> plus <c>PartitionHeaders</c>), names included, in a fixed
/// order, so whichever way a client authenticates, two credentials never share entries. The hash, never the
/// credential, is what the store and the event log hold.
/// </summary>
public static class PartitionKey
{
    /// <summary>The partition of lane calls that carry no credential at all: they share entries with each other only.</summary>
    public const string Anonymous = "anonymous";

    /// <summary>The one partition of <c>Partition = shared</c>.</summary>
    public const string Shared = "shared";

    // Bumped when the hashed form changes, so old and new hashes never meet.
    const string Domain = "rewriteproxy-partition/2\n";

    public static string Of(PartitionOptions options, IHeaderDictionary headers)
    {
        if (options.Mode == PartitionMode.Shared) return Shared;

        var names = options.CredentialHeaders.Concat(options.Headers)
            .Select(h => h.ToLowerInvariant())
            .Distinct(StringComparer.Ordinal)
            .Order(StringComparer.Ordinal);
        var text = new StringBuilder(Domain);
        var any = false;
        foreach (var name in names)
        {
            if (!headers.TryGetValue(name, out var values)) continue;
            foreach (var value in values)
            {
                if (string.IsNullOrEmpty(value)) continue;
                // Length-prefixed, so no value can be shifted into its neighbour to make another credential's text.
                text.Append(name.Length).Append(':').Append(name).Append(value.Length).Append(':').Append(value).Append('\n');
                any = true;
            }
        }
        return any ? Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(text.ToString()))) : Anonymous;
    }
}
