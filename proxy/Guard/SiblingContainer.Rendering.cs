using System.Text.Json;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;

namespace RewriteProxy.Guard;

/// <summary>Writing the kept siblings back in the container the model used.</summary>
public sealed partial class SiblingContainer
{
    /// <summary>
    /// The answer holding only <paramref name="kept"/> (candidate texts, as the guard returned them) in this
    /// container; null for a plain completion, whose answer is the guard's own content.
    /// </summary>
    public string? Render(IReadOnlyList<string> kept)
    {
        var wanted = kept.GroupBy(k => k, StringComparer.Ordinal).ToDictionary(g => g.Key, g => g.Count(), StringComparer.Ordinal);
        bool Take(string candidate)
        {
            if (!wanted.TryGetValue(candidate, out var left) || left == 0) return false;
            wanted[candidate] = left - 1;
            return true;
        }

        if (_jsonRoot is not null)
        {
            var root = _jsonRoot!.DeepClone();
            var array = root is JsonArray a ? a : ((JsonObject)root).Select(p => p.Value).OfType<JsonArray>().First(IsStrings);
            var keep = new bool[array.Count];
            for (var i = 0; i < array.Count; i++) keep[i] = _candidateOfLine![i] >= 0 && Take(Candidates[_candidateOfLine[i]]);
            for (var i = array.Count - 1; i >= 0; i--)
                if (!keep[i]) array.RemoveAt(i);
            var json = WriteJson(root);
            var (start, length) = _span!.Value;
            return _completion[..start] + json + _completion[(start + length)..];
        }
        if (_lines is null) return null;

        var lines = new List<string>(_lines.Length);
        for (var i = 0; i < _lines.Length; i++)
        {
            var c = _candidateOfLine![i];
            if (c == -1 || (c >= 0 && Take(Candidates[c]))) lines.Add(_lines[i]);
        }
        var (from, count) = _span!.Value;
        return _completion[..from] + string.Join('\n', lines) + _completion[(from + count)..];
    }

    /// <summary>
    /// The answer holding <paramref name="text"/> alone, in this container: the never-empty fallback. In a list it
    /// takes the first candidate line's place and marker; plain, it is the text itself.
    /// </summary>
    public string RenderOnly(string text)
    {
        if (_jsonRoot is not null)
        {
            var root = _jsonRoot.DeepClone();
            var array = root is JsonArray a ? a : ((JsonObject)root).Select(p => p.Value).OfType<JsonArray>().First(IsStrings);
            array.Clear();
            array.Add(text);
            var (start, length) = _span!.Value;
            return _completion[..start] + WriteJson(root) + _completion[(start + length)..];
        }
        if (_lines is null) return text;
        var lines = new List<string>(_lines.Length);
        var placed = false;
        for (var i = 0; i < _lines.Length; i++)
        {
            var c = _candidateOfLine![i];
            if (c == -1) lines.Add(_lines[i]);
            else if (c == NotASibling) continue;
            else if (!placed)
            {
                var line = _lines[i].TrimEnd('\r');
                var at = line.IndexOf(Candidates[c], StringComparison.Ordinal);
                // Keep the line's marker and quotes around the new text; a line cleaned beyond recognition keeps its marker.
                lines.Add(at >= 0
                    ? line[..at] + text + line[(at + Candidates[c].Length)..]
                    : (MarkerOf(line).Length > 0 ? MarkerText(line) : "") + text);
                placed = true;
            }
        }
        var (from, count) = _span!.Value;
        return _completion[..from] + string.Join('\n', lines) + _completion[(from + count)..];
    }

    static string MarkerText(string line)
    {
        var m = Number.Match(line);
        if (!m.Success) m = Bullet.Match(line);
        return m.Success ? line[..(m.Index + m.Length)].TrimEnd() + " " : "";
    }

    string WriteJson(JsonNode root)
    {
        if (_jsonIndent.Length == 0)
        {
            // One line, as the model wrote it; ", " between items when the model put a space after its commas.
            var compact = root.ToJsonString(Relaxed);
            var spaced = Regex.IsMatch(_completion, @"""\s*,[ \t]+""", RegexOptions.None, RegexBudget);
            return spaced ? JoinSpaced(root) : compact;
        }
        var options = new JsonSerializerOptions(Relaxed)
        {
            WriteIndented = true,
            IndentCharacter = _jsonIndent[0],
            IndentSize = _jsonIndent.Length,
        };
        return root.ToJsonString(options);
    }

    static string JoinSpaced(JsonNode root)
    {
        string Array(JsonArray a) => "[" + string.Join(", ", a.Select(i => i!.ToJsonString(Relaxed))) + "]";
        return root switch
        {
            JsonArray a => Array(a),
            JsonObject o => "{" + string.Join(", ", o.Select(p =>
                JsonSerializer.Serialize(p.Key, Relaxed) + ": " + (p.Value is JsonArray a ? Array(a) : p.Value?.ToJsonString(Relaxed) ?? "null"))) + "}",
            _ => root.ToJsonString(Relaxed),
        };
    }
}
