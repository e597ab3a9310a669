namespace RewriteProxy.Lanes;

/// <summary>
/// A lane's prompt template, learned from traffic: the stable text before and after the question in the last user
/// message, within one learning key (lane, model, the other messages, parameters, partition; hashed).
/// </summary>
/// <param name="Lane">The lane's name.</param>
/// <param name="Key">The learning key: a hash, holding no text.</param>
/// <param name="Partition">The partition it was learned in (a hash): a purge by partition removes it.</param>
/// <param name="Prefix">Stable text before the question (may be empty when <paramref name="Suffix"/> is not).</param>
/// <param name="Suffix">Stable text after the question.</param>
/// <param name="LearnedFrom">How many distinct calls the template was inferred from.</param>
/// <param name="LearnedAt">When it was inferred.</param>
public sealed record LearnedTemplate(string Lane, string Key, string Partition, string Prefix, string Suffix, int LearnedFrom, DateTimeOffset LearnedAt)
{
    /// <summary>The question's span in <paramref name="text"/> when the text fits this template, else null.</summary>
    public (int Start, int Length)? Match(string text)
    {
        if (text.Length <= Prefix.Length + Suffix.Length) return null;
        if (!text.StartsWith(Prefix, StringComparison.Ordinal) || !text.EndsWith(Suffix, StringComparison.Ordinal)) return null;
        int start = Prefix.Length, end = text.Length - Suffix.Length;
        while (start < end && char.IsWhiteSpace(text[start])) start++;
        while (end > start && char.IsWhiteSpace(text[end - 1])) end--;
        return end > start ? (start, end - start) : null;
    }

    /// <summary>The template as a reader sees it: the question shown as <c>{question}</c>.</summary>
    public string Shape => Prefix + "{question}" + Suffix;
}

/// <summary>
/// Learns prompt templates from the traffic of each learning key. The instruction text of a template stays the same
/// from call to call and the question changes, so across several distinct last user messages of one key the common
/// prefix and suffix are the template and what lies between them is the question.
/// </summary>
/// <remarks>
/// <para>Rules, each there to keep bare-question traffic from being taken for a template:</para>
/// <list type="bullet">
/// <item>At least <see cref="MinDistinctCalls"/> distinct messages of the key.</item>
/// <item>The stable parts are cut back to a line break or a delimiter (a colon, an opening or closing quote,
/// bracket, backtick or XML-style tag), never mid-word and never at a plain space: questions that happen to start
/// alike ("What is the refund policy for …") share words, not a line break or a label.</item>
/// <item>The stable parts hold at least <see cref="MinStableWords"/> words.</item>
/// <item>The changing spans share no line: a second changing span (the question repeated further down) would
/// otherwise be swallowed into the question.</item>
/// </list>
/// <para>Pending messages are kept in memory only, at most <see cref="MaxPendingPerKey"/> per key and
/// <see cref="MaxPendingKeys"/> keys; learned templates are handed to <see cref="Learned"/> to be persisted.</para>
/// </remarks>
public sealed class TemplateLearner
{
    /// <summary>
    /// Distinct messages a template is inferred from. Two can agree by chance on a quoted or labelled opening; three
    /// make that unlikely, and the issue asks for a template to be known within the first five distinct questions.
    /// </summary>
    public const int MinDistinctCalls = 3;

    /// <summary>Least words in prefix + suffix. "Question: " is one word, so a label alone is left to the markers;
    /// an instruction is longer.</summary>
    public const int MinStableWords = 3;

    /// <summary>Pending messages per key: enough to learn after a stray message of another shape.</summary>
    public const int MaxPendingPerKey = 8;

    /// <summary>Keys with pending messages; the oldest is forgotten first. Bounds memory under many tenants.</summary>
    public const int MaxPendingKeys = 1000;

    /// <summary>Longer messages are not learned from (a rewrite prompt is short; a pasted document is not a template).</summary>
    public const int MaxMessageChars = 16_384;

    /// <summary>Templates per key; a key whose app sends more shapes than this is left to the markers.</summary>
    public const int MaxTemplatesPerKey = 4;

    readonly object _gate = new();
    readonly Dictionary<string, List<LearnedTemplate>> _templates = new(StringComparer.Ordinal);
    readonly Dictionary<string, List<string>> _pending = new(StringComparer.Ordinal);
    readonly LinkedList<string> _pendingOrder = new();
    readonly Dictionary<LearnedTemplate, long> _matches = new(ReferenceEqualityComparer.Instance);

    /// <summary>Called (outside the lock) with each newly learned template, to persist it.</summary>
    public Action<LearnedTemplate>? Learned { get; set; }

    /// <summary>Templates learned earlier (from the store), made known again.</summary>
    public void Load(IEnumerable<LearnedTemplate> templates)
    {
        lock (_gate)
            foreach (var t in templates)
            {
                var list = ListFor(t.Key);
                if (!list.Any(x => x.Prefix == t.Prefix && x.Suffix == t.Suffix)) list.Add(t);
            }
    }

    /// <summary>Every known template with the calls it has matched in this process.</summary>
    public IReadOnlyList<(LearnedTemplate Template, long Matched)> Snapshot()
    {
        lock (_gate)
            return _templates.Values.SelectMany(l => l).Select(t => (t, _matches.GetValueOrDefault(t))).ToList();
    }

    /// <summary>
    /// The question span of <paramref name="text"/> by a learned template of <paramref name="key"/>; otherwise the text
    /// is kept as a sample and null is returned (a template may be learned from it and earlier samples).
    /// </summary>
    public (int Start, int Length, LearnedTemplate Template)? Locate(string lane, string key, string partition, string text)
    {
        LearnedTemplate? learned = null;
        lock (_gate)
        {
            if (_templates.TryGetValue(key, out var list))
                // Longest stable text first: a more specific template wins over a looser one of the same key.
                foreach (var t in list.OrderByDescending(t => t.Prefix.Length + t.Suffix.Length))
                    if (t.Match(text) is { } span)
                    {
                        _matches[t] = _matches.GetValueOrDefault(t) + 1;
                        return (span.Start, span.Length, t);
                    }
            if (text.Length > MaxMessageChars || list?.Count >= MaxTemplatesPerKey) return null;
            learned = Observe(lane, key, partition, text);
        }
        if (learned is null) return null;
        Learned?.Invoke(learned);
        var found = learned.Match(text)!.Value;
        return (found.Start, found.Length, learned);
    }

    List<LearnedTemplate> ListFor(string key)
    {
        if (!_templates.TryGetValue(key, out var list)) _templates[key] = list = [];
        return list;
    }

    LearnedTemplate? Observe(string lane, string key, string partition, string text)
    {
        if (!_pending.TryGetValue(key, out var samples))
        {
            if (_pending.Count >= MaxPendingKeys)
            {
                _pending.Remove(_pendingOrder.First!.Value);
                _pendingOrder.RemoveFirst();
            }
            _pending[key] = samples = [];
            _pendingOrder.AddLast(key);
        }
        if (samples.Contains(text, StringComparer.Ordinal)) return null;
        samples.Add(text);
        if (samples.Count > MaxPendingPerKey) samples.RemoveAt(0);
        if (samples.Count < MinDistinctCalls) return null;

        // All samples first; then only the latest few, in case older ones were of another shape.
        var template = Infer(samples) ?? Infer(samples.TakeLast(MinDistinctCalls).ToList());
        if (template is null) return null;
        var learned = new LearnedTemplate(lane, key, partition, template.Value.Prefix, template.Value.Suffix,
            samples.Count(s => Fits(template.Value, s)), DateTimeOffset.UtcNow);
        ListFor(key).Add(learned);
        samples.RemoveAll(s => learned.Match(s) is not null);
        if (samples.Count == 0)
        {
            _pending.Remove(key);
            _pendingOrder.Remove(key);
        }
        return learned;
    }

    static bool Fits((string Prefix, string Suffix) t, string s) =>
        s.Length > t.Prefix.Length + t.Suffix.Length && s.StartsWith(t.Prefix, StringComparison.Ordinal) &&
        s.EndsWith(t.Suffix, StringComparison.Ordinal);

    /// <summary>The template shared by <paramref name="samples"/> under the rules of the type, or null.</summary>
    internal static (string Prefix, string Suffix)? Infer(IReadOnlyList<string> samples)
    {
        if (samples.Count < MinDistinctCalls) return null;
        var first = samples[0];
        var prefixLength = first.Length;
        var suffixLength = first.Length;
        foreach (var s in samples.Skip(1))
        {
            prefixLength = Math.Min(prefixLength, CommonPrefix(first, s));
            suffixLength = Math.Min(suffixLength, CommonSuffix(first, s));
        }
        var prefix = PrefixAtBoundary(first[..prefixLength]);
        var suffix = SuffixAtBoundary(first[(first.Length - suffixLength)..]);

        var middles = new List<string>();
        foreach (var s in samples)
        {
            if (s.Length <= prefix.Length + suffix.Length) return null;
            var middle = s[prefix.Length..(s.Length - suffix.Length)].Trim();
            if (middle.Length == 0) return null;
            middles.Add(middle);
        }
        if (middles.Distinct(StringComparer.Ordinal).Count() < MinDistinctCalls) return null;
        if (Words(prefix) + Words(suffix) < MinStableWords) return null;
        if (SharedLine(middles)) return null;
        return (prefix, suffix);
    }

    static int CommonPrefix(string a, string b)
    {
        var n = Math.Min(a.Length, b.Length);
        var i = 0;
        while (i < n && a[i] == b[i]) i++;
        return i;
    }

    static int CommonSuffix(string a, string b)
    {
        var n = Math.Min(a.Length, b.Length);
        var i = 0;
        while (i < n && a[a.Length - 1 - i] == b[b.Length - 1 - i]) i++;
        return i;
    }

    // Characters after which a question may start: a line break, a label's colon, an opening quote, bracket or tag.
    // '<' and '>' both ways: "<<<" opens and ">>>" closes as a tag's '>' and '<' do.
    static bool OpensQuestion(char c) => c is '\n' or ':' or '：' or '"' or '“' or '«' or '>' or '<' or '`' or '(' or '[' or '{';

    // Characters before which a question may end: a line break, a closing quote, bracket or tag.
    static bool ClosesQuestion(char c) => c is '\n' or '\r' or '"' or '”' or '»' or '<' or '>' or '`' or ')' or ']' or '}';

    /// <summary>The longest start of <paramref name="common"/> ending at a boundary, with the spaces after it.</summary>
    internal static string PrefixAtBoundary(string common)
    {
        var end = common.Length;
        // Spaces and tabs after the boundary belong to the template ("Question: "); a line break is itself a boundary.
        while (end > 0 && common[end - 1] is ' ' or '\t') end--;
        while (end > 0 && !OpensQuestion(common[end - 1])) end--;
        if (end == 0) return "";
        while (end < common.Length && common[end] is ' ' or '\t') end++;
        return common[..end];
    }

    /// <summary>The longest end of <paramref name="common"/> starting at a boundary, with the spaces before it.</summary>
    internal static string SuffixAtBoundary(string common)
    {
        var start = 0;
        while (start < common.Length && common[start] is ' ' or '\t') start++;
        while (start < common.Length && !ClosesQuestion(common[start])) start++;
        if (start == common.Length) return "";
        while (start > 0 && common[start - 1] is ' ' or '\t') start--;
        return common[start..];
    }

    static int Words(string s) => s.Split((char[]?)null, StringSplitOptions.RemoveEmptyEntries).Count(w => w.Any(char.IsLetterOrDigit));

    /// <summary>True when every changing span holds the same line of three or more words: a second changing span.</summary>
    static bool SharedLine(IReadOnlyList<string> middles)
    {
        var common = middles[0].Split('\n').Select(l => l.Trim()).Where(l => Words(l) >= MinStableWords).ToHashSet(StringComparer.Ordinal);
        foreach (var m in middles.Skip(1))
            common.IntersectWith(m.Split('\n').Select(l => l.Trim()));
        return common.Count > 0;
    }
}
