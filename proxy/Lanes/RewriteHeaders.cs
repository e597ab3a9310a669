using System.Globalization;
using System.Text.Json;
using RewriteProxy.Cache;

namespace RewriteProxy.Lanes;

/// <summary>The <c>X-Rewrite-*</c> headers of lane calls (README "Pointing an app at the proxy").</summary>
public static class RewriteHeaders
{
    public const string Cache = "X-Rewrite-Cache";
    public const string Similarity = "X-Rewrite-Similarity";
    public const string Drift = "X-Rewrite-Drift";
    public const string Dropped = "X-Rewrite-Dropped";
    public const string SavedTokens = "X-Rewrite-Saved-Tokens";
    public const string Bypass = "X-Rewrite-Bypass";
    public const string Mode = "X-Rewrite-Mode";
    public const string Fallback = "X-Rewrite-Fallback";
    /// <summary>The request header that turns <c>/v1/chat/completions</c> into a lane call.</summary>
    public const string Lane = "X-Rewrite-Lane";

    /// <summary>The <see cref="Cache"/> value of a result: <c>hit-exact</c>, <c>hit-semantic</c>, <c>miss</c>, <c>bypass</c>.</summary>
    public static string CacheValue(CacheResult result) => JsonNamingPolicy.KebabCaseLower.ConvertName(result.ToString());

    /// <summary>Similarities and drifts to four decimals, whatever the culture.</summary>
    public static string Decimal(double value) => value.ToString("0.0000", CultureInfo.InvariantCulture);

    public static string Count(long value) => value.ToString(CultureInfo.InvariantCulture);
}
