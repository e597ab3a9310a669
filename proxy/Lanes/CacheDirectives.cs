using Microsoft.Extensions.Primitives;

namespace RewriteProxy.Lanes;

/// <summary>
/// The request Cache-Control directives a lane honours (RFC 9111 §5.2.1): <c>no-cache</c> = do not answer from the
/// cache but store the fresh result; <c>no-store</c> = neither look up nor store; <c>only-if-cached</c> = answer from
/// the cache or with 504, never ask the upstream.
/// </summary>
public readonly record struct CacheDirectives(bool NoCache, bool NoStore, bool OnlyIfCached)
{
    /// <summary>
    /// Reads every Cache-Control field line as one list (RFC 9110 §5.3): <c>#cache-directive</c>, where
    /// <c>cache-directive = token [ "=" ( token / quoted-string ) ]</c> (RFC 9111 §5.2). Names are compared
    /// case-insensitively; an argument is skipped whole, so a comma or a directive name inside a quoted string is not
    /// read as a directive; empty list elements are allowed (RFC 9110 §5.6.1); a malformed element is skipped up to
    /// the next comma, and the others still count.
    /// </summary>
    public static CacheDirectives Parse(StringValues values)
    {
        bool noCache = false, noStore = false, onlyIfCached = false;
        foreach (var value in values)
        {
            if (string.IsNullOrEmpty(value)) continue;
            foreach (var name in Names(value))
            {
                if (name.Equals("no-cache", StringComparison.OrdinalIgnoreCase)) noCache = true;
                else if (name.Equals("no-store", StringComparison.OrdinalIgnoreCase)) noStore = true;
                else if (name.Equals("only-if-cached", StringComparison.OrdinalIgnoreCase)) onlyIfCached = true;
            }
        }
        return new CacheDirectives(noCache, noStore, onlyIfCached);
    }

    /// <summary>The names of the well-formed directives of one field line.</summary>
    static List<string> Names(string line)
    {
        var names = new List<string>();
        var i = 0;
        while (i < line.Length)
        {
            i = SkipWhitespace(line, i);
            if (i < line.Length && line[i] == ',')
            {
                i++;
                continue;
            }
            var start = i;
            while (i < line.Length && IsTokenChar(line[i])) i++;
            var name = line[start..i];
            i = SkipWhitespace(line, i);
            var wellFormed = name.Length > 0;
            if (wellFormed && i < line.Length && line[i] == '=')
            {
                i = SkipWhitespace(line, i + 1);
                (i, wellFormed) = SkipArgument(line, i);
                i = SkipWhitespace(line, i);
            }
            if (wellFormed && (i == line.Length || line[i] == ','))
                names.Add(name);
            else
                i = SkipToNextElement(line, i);
        }
        return names;
    }

    /// <summary>Skips a token or a quoted-string (with its quoted-pairs); false when neither is there or a quote is left open.</summary>
    static (int Next, bool WellFormed) SkipArgument(string line, int i)
    {
        if (i < line.Length && line[i] == '"')
        {
            for (i++; i < line.Length; i++)
            {
                if (line[i] == '\\') i++;
                else if (line[i] == '"') return (i + 1, true);
            }
            return (line.Length, false);
        }
        var start = i;
        while (i < line.Length && IsTokenChar(line[i])) i++;
        return (i, i > start);
    }

    /// <summary>The position after the next comma that is not inside a quoted string, or the end.</summary>
    static int SkipToNextElement(string line, int i)
    {
        var quoted = false;
        for (; i < line.Length; i++)
        {
            if (quoted && line[i] == '\\') i++;
            else if (line[i] == '"') quoted = !quoted;
            else if (!quoted && line[i] == ',') return i + 1;
        }
        return line.Length;
    }

    static int SkipWhitespace(string line, int i)
    {
        while (i < line.Length && line[i] is ' ' or '\t') i++;
        return i;
    }

    /// <summary>tchar of RFC 9110 §5.6.2.</summary>
    static bool IsTokenChar(char c) => char.IsAsciiLetterOrDigit(c) || "!#$%&'*+-.^_`|~".Contains(c);
}
