using System.Globalization;
using System.Text.RegularExpressions;

namespace RewriteProxy;

/// <summary>The one spelling of durations, in settings, the admin API and the CLI: "250ms", "30s", "5m", "12h", "7d" or a .NET TimeSpan.</summary>
public static partial class DurationText
{
    [GeneratedRegex(@"^(\d+(?:\.\d+)?)\s*(ms|s|m|h|d)$", RegexOptions.IgnoreCase)]
    private static partial Regex NumberWithUnit();

    /// <summary>Parses "90s", "5m", "12h", "7d", "250ms" or a .NET TimeSpan ("00:01:40", "7.00:00:00").</summary>
    public static bool TryParse(string text, out TimeSpan value)
    {
        text = text.Trim();
        var m = NumberWithUnit().Match(text);
        if (m.Success)
        {
            var n = double.Parse(m.Groups[1].Value, CultureInfo.InvariantCulture);
            value = m.Groups[2].Value.ToLowerInvariant() switch
            {
                "ms" => TimeSpan.FromMilliseconds(n),
                "s" => TimeSpan.FromSeconds(n),
                "m" => TimeSpan.FromMinutes(n),
                "h" => TimeSpan.FromHours(n),
                _ => TimeSpan.FromDays(n),
            };
            return true;
        }
        return TimeSpan.TryParse(text, CultureInfo.InvariantCulture, out value);
    }
}
