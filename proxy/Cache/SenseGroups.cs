namespace RewriteProxy.Cache;

/// <summary>
/// A word's WordNet senses per part of speech (noun, verb, adjective, adverb), most frequent first, in one array:
/// the four end offsets, then the sense ids. One array per word instead of five: 145k words held as jagged arrays cost
/// about 25 MB of the proxy's resident memory, this about 7 (docs/measurements/performance.md).
/// </summary>
internal readonly struct SenseGroups
{
    public const int Parts = 4;
    readonly int[] _data;

    SenseGroups(int[] data) => _data = data;

    /// <summary>Packs one group of sense ids per part of speech (exactly <see cref="Parts"/> groups).</summary>
    public static SenseGroups Of(IReadOnlyList<int[]> groups)
    {
        if (groups.Count != Parts) throw new FormatException($"a word has {groups.Count} sense groups, not {Parts}");
        var data = new int[Parts + groups.Sum(g => g.Length)];
        var at = Parts;
        for (var p = 0; p < Parts; p++)
        {
            groups[p].CopyTo(data, at);
            at += groups[p].Length;
            data[p] = at;
        }
        return new SenseGroups(data);
    }

    /// <summary>The senses of part of speech <paramref name="part"/> (0 noun, 1 verb, 2 adjective, 3 adverb).</summary>
    public ReadOnlySpan<int> this[int part] => _data.AsSpan()[(part == 0 ? Parts : _data[part - 1])..(_data[part])];

    public int Length => Parts;

    /// <summary>Senses over all parts of speech.</summary>
    public int Count => _data.Length - Parts;
}
