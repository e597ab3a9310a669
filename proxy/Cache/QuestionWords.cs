using System.Text.RegularExpressions;

namespace RewriteProxy.Cache;

/// <summary>
/// The words of one question as the hit decision aligns them: lower-case, split at hyphens and apostrophes' "s",
/// each with its WordNet lemmas and its word class. Read once per question.
/// </summary>
public sealed partial class QuestionWords
{
    internal QuestionWords(string[] raw, string[] words, string[][] lemmas, WordClass[] classes, WordUnit[] units)
    {
        Raw = raw;
        Words = words;
        Lemmas = lemmas;
        Classes = classes;
        Units = units;
    }

    /// <summary>Every word's lemmas, and every compound of two or three words that WordNet knows ("pay back", "first aid kit"), with the words it covers.</summary>
    internal WordUnit[] Units { get; }

    internal string[] Raw { get; }
    internal string[] Words { get; }
    internal string[][] Lemmas { get; }
    internal WordClass[] Classes { get; }
    public int Count => Words.Length;

    [GeneratedRegex(@"[\p{L}\p{N}]+(?:['’][\p{L}]+)?")]
    private static partial Regex WordPattern();

    internal static QuestionWords Read(string question, WordSenses senses)
    {
        var raw = new List<string>();
        foreach (Match m in WordPattern().Matches(question))
        {
            var w = m.Value.Replace('’', '\'');
            if (w.EndsWith("'s", StringComparison.OrdinalIgnoreCase)) w = w[..^2];
            else if (w.EndsWith("n't", StringComparison.OrdinalIgnoreCase)) { raw.Add(w[..^3]); w = "not"; }
            else if (w.EndsWith("'re", StringComparison.OrdinalIgnoreCase) || w.EndsWith("'ve", StringComparison.OrdinalIgnoreCase)
                     || w.EndsWith("'ll", StringComparison.OrdinalIgnoreCase)) w = w[..^3];
            else if (w.EndsWith("'m", StringComparison.OrdinalIgnoreCase) || w.EndsWith("'d", StringComparison.OrdinalIgnoreCase)) w = w[..^2];
            if (w.Length > 0) raw.Add(w);
        }
        var words = raw.Select(w => w.ToLowerInvariant()).ToArray();
        var lemmas = words.Select(w => w.Any(char.IsDigit) ? [w] : senses.Lemmas(w)).ToArray();
        var classes = words.Select(Classify).ToArray();
        var units = new List<WordUnit>();
        for (var k = 0; k < words.Length; k++)
        {
            if (classes[k] == WordClass.Number) continue;
            units.Add(new WordUnit(k, 1, lemmas[k]));
            for (var len = 2; len <= 3 && k + len <= words.Length; len++)
            {
                var compound = string.Join(' ', words[k..(k + len)]);
                if (senses.Knows(compound)) units.Add(new WordUnit(k, len, [compound]));
                // "paying back" → "pay back"
                var tail = string.Join(' ', words[(k + 1)..(k + len)]);
                foreach (var lemma in lemmas[k])
                {
                    var head = lemma + " " + tail;
                    if (head != compound && senses.Knows(head))
                    {
                        units.Add(new WordUnit(k, len, [head]));
                        break;
                    }
                }
            }
        }
        return new QuestionWords([.. raw], words, lemmas, classes, [.. units]);
    }

    static WordClass Classify(string word)
    {
        if (word.Any(char.IsDigit) || AnchorLexicon.Cardinals.ContainsKey(word) || HitLexicon.NumberWords.Contains(word)) return WordClass.Number;
        if (HitLexicon.Function.Contains(word)) return WordClass.Function;
        if (HitLexicon.Particles.Contains(word)) return WordClass.Particle;
        return WordClass.Content;
    }
}

/// <summary>A word or a compound WordNet knows, by the words it covers.</summary>
internal readonly record struct WordUnit(int Start, int Length, string[] Lemmas);

/// <summary>How a word takes part in the comparison of two questions.</summary>
internal enum WordClass : byte
{
    /// <summary>Carries the meaning: a substitution of it must be a synonym.</summary>
    Content,
    /// <summary>Prepositions and particles: they matter where they replace another ("opt in" / "opt out"), not where a rewording adds them.</summary>
    Particle,
    /// <summary>Articles, pronouns, auxiliaries, question words, fillers: rewordings change them freely.</summary>
    Function,
    /// <summary>Numbers: compared by the anchor guard, not here.</summary>
    Number,
}
