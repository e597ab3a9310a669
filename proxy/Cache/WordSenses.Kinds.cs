namespace RewriteProxy.Cache;

/// <summary>What the learned combiner reads of a word beyond its synonyms: how general it is, whether it names a thing, and its kin.</summary>
internal sealed partial class WordSenses
{
    /// <summary>Senses of the lemma over all parts of speech; 0 when WordNet does not know it (a name, a casual word, a typo).</summary>
    public int SenseCount(string lemma) => _senses.TryGetValue(lemma, out var groups) ? groups.Count : 0;

    /// <summary>The lemma is mostly a noun: it has noun senses and at least as many as verb senses ("cat", "fee"; not "pay").</summary>
    public bool IsNoun(string lemma) =>
        _senses.TryGetValue(lemma, out var groups) && groups[0].Length > 0 && groups[0].Length >= groups[1].Length;

    /// <summary>
    /// Two lemmas are kin: among their first <see cref="Depth"/> senses of a part of speech, one is a direct hypernym of the
    /// other or both share one within two steps ("diesel" / "petrol" are both fuels, "cat" / "dog" both carnivores). Kin that
    /// are not synonyms are the members of one kind that a near-miss swaps.
    /// </summary>
    public bool Kin(string a, string b)
    {
        if (a == b || !_senses.TryGetValue(a, out var x) || !_senses.TryGetValue(b, out var y)) return false;
        for (var p = 0; p < x.Length; p++)
        {
            var up = Ancestors(x[p]);
            if (up.Count == 0) continue;
            foreach (var j in Ancestors(y[p]))
                if (up.Contains(j)) return true;
        }
        return false;
    }

    /// <summary>One lemma names a kind of the other within two steps, among their first senses ("fee" is a "charge"): a wider word, often a synonym's stand-in.</summary>
    public bool Broader(string a, string b)
    {
        if (a == b || !_senses.TryGetValue(a, out var x) || !_senses.TryGetValue(b, out var y)) return false;
        for (var p = 0; p < x.Length; p++)
        {
            var upA = Ancestors(x[p]);
            var upB = Ancestors(y[p]);
            if (AnyOf(y[p], upA) || AnyOf(x[p], upB)) return true;
        }
        return false;
    }

    /// <summary>One of the first <see cref="Depth"/> senses is in <paramref name="set"/>.</summary>
    bool AnyOf(ReadOnlySpan<int> senses, HashSet<int> set)
    {
        foreach (var s in senses[..Math.Min(Depth, senses.Length)])
            if (set.Contains(s)) return true;
        return false;
    }

    /// <summary>The first senses themselves and their hypernyms up to two steps.</summary>
    HashSet<int> Ancestors(ReadOnlySpan<int> senses)
    {
        var found = new HashSet<int>();
        List<int> level = [.. senses[..Math.Min(Depth, senses.Length)]];
        for (var step = 0; step <= 2 && level.Count > 0; step++)
        {
            var next = new List<int>();
            foreach (var s in level)
                if (found.Add(s) && step < 2 && _hypernyms.TryGetValue(s, out var up)) next.AddRange(up);
            level = next;
        }
        return found;
    }
}
