using System.Text.Encodings.Web;
using System.Text.Json;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;
using RewriteProxy.Hosting;

namespace RewriteProxy.Guard;

/// <summary>
/// The shape a siblings completion came in, and how to write the kept siblings back in that shape, so that the
/// client's own output parser reads the proxy's answer exactly as it reads the model's.
/// </summary>
/// <remarks>
/// <para>Lines containers (tags, numbered, bulleted, any of them inside a code fence): the answer is the completion
/// with every candidate line that was not kept removed, everything else as the model wrote it (preamble, tags,
/// fence, numbering). Kept lines stay in the completion's order and keep their own markers, so a numbered list may
/// skip a number: a parser that keeps the numbers (LangChain's LineListOutputParser does) then returns exactly the
/// direct call's list less the dropped lines.</para>
/// <para>JSON: the array (or the object's array) is written again with only the kept strings, indented as the
/// model indented it; other members of an object are kept.</para>
/// <para>Plain: <see cref="Render"/> returns null and the guard's own content (kept siblings one per line, in
/// selection order) is the answer, as it always was.</para>
/// </remarks>
public sealed partial class SiblingContainer
{
    static readonly TimeSpan RegexBudget = TimeSpan.FromMilliseconds(100);
    static readonly Regex Fence = new(@"```[^\r\n`]*\r?\n(?<inner>[\s\S]*?)\r?\n?```", RegexOptions.CultureInvariant, RegexBudget);
    static readonly Regex TagPair = new(@"<(?<tag>[A-Za-z_][\w.-]{0,40})>(?<inner>[\s\S]*?)</\k<tag>>", RegexOptions.CultureInvariant, RegexBudget);
    static readonly Regex Number = new(@"^\s*\(?\d{1,2}(?<p>[.):])(?!\d)", RegexOptions.CultureInvariant, RegexBudget);
    static readonly Regex Bullet = new(@"^\s*(?<b>[-*•–—+·▪◦‣])\s", RegexOptions.CultureInvariant, RegexBudget);

    const int NotASibling = -2;

    static readonly JsonSerializerOptions Relaxed = new() { Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping };

    readonly string _completion;
    // Where the container's inner text (lines) or the JSON text sits in the completion.
    readonly (int Start, int Length)? _span;
    // Lines containers: every line of the inner text. Both kinds: which line (or JSON item) is which candidate;
    // -1 for text around the list (kept), NotASibling for an item that is no candidate (removed).
    readonly string[]? _lines;
    readonly int[]? _candidateOfLine;
    // JSON: the parsed root and the indent the model used.
    readonly JsonNode? _jsonRoot;
    readonly string _jsonIndent = "";

    /// <summary>A <see cref="ContainerKind"/> word.</summary>
    public string Kind { get; }

    /// <summary>True when the container sits inside a code fence.</summary>
    public bool Fenced { get; }

    /// <summary>Candidate siblings in completion order, cleaned as <see cref="SiblingParser"/> cleans them.</summary>
    public IReadOnlyList<string> Candidates { get; }

    SiblingContainer(string completion, string kind, bool fenced, IReadOnlyList<string> candidates)
    {
        _completion = completion;
        Kind = kind;
        Fenced = fenced;
        Candidates = candidates;
    }

    SiblingContainer(string completion, string kind, bool fenced, IReadOnlyList<string> candidates, (int, int) inner, string[] lines,
        int[] candidateOfLine)
        : this(completion, kind, fenced, candidates)
    {
        _span = inner;
        _lines = lines;
        _candidateOfLine = candidateOfLine;
    }

    SiblingContainer(string completion, bool fenced, IReadOnlyList<string> candidates, (int, int) span, JsonNode root, string indent,
        int[] candidateOfItem)
        : this(completion, ContainerKind.Json, fenced, candidates)
    {
        _span = span;
        _jsonRoot = root;
        _jsonIndent = indent;
        _candidateOfLine = candidateOfItem;
    }

    /// <summary>True when <see cref="Render"/> writes the answer (every kind but plain).</summary>
    public bool Renders => Kind != ContainerKind.Plain;

    /// <summary>Reads the shape of <paramref name="completion"/> and its candidates under <paramref name="rule"/>.</summary>
    public static SiblingContainer Read(string completion, CandidateRule rule)
    {
        try
        {
            var fence = Fence.Match(completion);
            var (start, length) = fence.Success ? (fence.Groups["inner"].Index, fence.Groups["inner"].Length) : (0, completion.Length);
            return ReadJson(completion, start, length, fence.Success, rule)
                ?? ReadLines(completion, start, length, fence.Success, rule)
                ?? Plain(completion, rule);
        }
        catch (RegexMatchTimeoutException)
        {
            return Plain(completion, rule);
        }
    }

    static SiblingContainer Plain(string completion, CandidateRule rule) =>
        new(completion, ContainerKind.Plain, false, SiblingParser.Parse(completion, rule));

    static SiblingContainer? ReadJson(string completion, int start, int length, bool fenced, CandidateRule rule)
    {
        var text = completion.Substring(start, length);
        var trimmed = text.Trim();
        if (trimmed.Length < 2 || trimmed[0] is not ('[' or '{')) return null;
        JsonNode? root;
        try
        {
            root = JsonNode.Parse(trimmed);
        }
        catch (JsonException)
        {
            return null;
        }
        var array = root switch
        {
            JsonArray a when IsStrings(a) => a,
            // An object holding one array of strings ({"queries": [...]}): that array is the list.
            JsonObject o when o.Select(p => p.Value).OfType<JsonArray>().Where(IsStrings).ToList() is [var only] => only,
            _ => null,
        };
        if (array is null || array.Count == 0) return null;
        // Each string is judged under the lane's rule, as a line would be; one that is no candidate (a statement
        // under the questions rule, an empty string) leaves the list, as it leaves a plain answer.
        var candidates = new List<string>();
        var candidateOfItem = new int[array.Count];
        for (var i = 0; i < array.Count; i++)
        {
            var found = SiblingParser.Parse(array[i]!.GetValue<string>().ReplaceLineEndings(" "), rule);
            candidateOfItem[i] = found.Count == 0 ? NotASibling : candidates.Count;
            if (found.Count > 0) candidates.Add(found[0]);
        }
        if (candidates.Count == 0) return null;
        var offset = start + text.IndexOf(trimmed, StringComparison.Ordinal);
        var indent = Regex.Match(trimmed, @"\n([ \t]+)\S", RegexOptions.None, RegexBudget) is { Success: true } m ? m.Groups[1].Value : "";
        // The nested array of an object is indented one level deeper; the indent unit is the outermost one.
        return new SiblingContainer(completion, fenced, candidates, (offset, trimmed.Length), root!, indent, candidateOfItem);
    }

    static bool IsStrings(JsonArray a) => a.All(i => i is JsonValue v && v.GetValueKind() == JsonValueKind.String);

    static SiblingContainer? ReadLines(string completion, int start, int length, bool fenced, CandidateRule rule)
    {
        // The container's inner text: the fence's, narrowed to a tag pair's when there is one.
        int from = start, to = start + length;
        var kind = (string?)null;
        var tag = TagPair.Match(completion, start, length);
        if (tag.Success)
        {
            (from, to) = (tag.Groups["inner"].Index, tag.Groups["inner"].Index + tag.Groups["inner"].Length);
            kind = ContainerKind.Tags;
        }

        var lines = completion[from..to].Split('\n');
        var candidateOfLine = new int[lines.Length];
        var candidates = new List<string>();
        var markers = new List<string>();
        for (var i = 0; i < lines.Length; i++)
        {
            candidateOfLine[i] = -1;
            var found = SiblingParser.Parse(lines[i].TrimEnd('\r'), rule);
            if (found.Count == 0) continue;
            candidateOfLine[i] = candidates.Count;
            candidates.Add(found[0]);
            markers.Add(MarkerOf(lines[i]));
        }
        if (candidates.Count == 0) return null;

        if (kind is null)
        {
            // Without tags, a list is a container only when every candidate carries the same kind of marker.
            if (markers.All(m => m.StartsWith("number", StringComparison.Ordinal)) && markers.Distinct().Count() == 1) kind = ContainerKind.Numbered;
            else if (markers.All(m => m.StartsWith("bullet", StringComparison.Ordinal)) && markers.Distinct().Count() == 1) kind = ContainerKind.Bulleted;
            else if (fenced) kind = ContainerKind.Fence;
            else return null;
        }
        // An item of the list that is no candidate (a statement, an answer instead of a question) leaves the list as
        // it leaves a plain answer: inside tags or a fence every non-blank line is an item; in a bare list, a line with
        // the list's marker.
        var listMarker = markers[0];
        for (var i = 0; i < lines.Length; i++)
        {
            if (candidateOfLine[i] >= 0 || lines[i].Trim().Length == 0) continue;
            var item = kind is ContainerKind.Tags or ContainerKind.Fence || MarkerOf(lines[i]) == listMarker;
            if (item) candidateOfLine[i] = NotASibling;
        }
        return new SiblingContainer(completion, kind, fenced, candidates, (from, to - from), lines, candidateOfLine);
    }

    static string MarkerOf(string line)
    {
        if (Number.Match(line) is { Success: true } n) return "number" + n.Groups["p"].Value;
        if (Bullet.Match(line) is { Success: true } b) return "bullet" + b.Groups["b"].Value;
        return "";
    }
}
