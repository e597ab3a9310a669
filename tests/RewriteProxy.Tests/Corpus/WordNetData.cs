using System.Collections.Concurrent;
using System.Globalization;

namespace RewriteProxy.Tests.Corpus;

/// <summary>
/// Just enough of the WordNet 3.0 data files (Debian wordnet-base, /usr/share/wordnet/data.{noun,verb,adj,adv}) to check
/// the corpus rows that name a WordNet word pair. Format: wndb(5WN), "Data File Format".
/// </summary>
public static class WordNetData
{
    public const string Root = "/usr/share/wordnet";

    public static bool Installed => File.Exists(Path.Combine(Root, "data.noun"));

    private sealed record Synset(string[] Words, Pointer[] Pointers);

    private sealed record Pointer(string Symbol, string Offset, string Pos, int Source, int Target);

    private static readonly ConcurrentDictionary<string, Dictionary<string, Synset>> Files = new();

    /// <summary>True when both lemmas are members of one synset of that part of speech.</summary>
    public static bool SameSynset(string pos, string first, string second) =>
        Load(pos).Values.Any(s => Has(s, first) && Has(s, second));

    /// <summary>
    /// True when WordNet has a direct antonym pointer ("!") between the two lemmas. Antonymy is lexical in WordNet, so the
    /// pointer must start at the first lemma itself, not at a synonym of it.
    /// </summary>
    public static bool DirectAntonyms(string pos, string first, string second) =>
        PointsTo(pos, first, second) || PointsTo(pos, second, first);

    private static bool PointsTo(string pos, string from, string to)
    {
        foreach (var synset in Load(pos).Values)
        {
            for (var i = 0; i < synset.Words.Length; i++)
            {
                if (!Same(synset.Words[i], from)) continue;
                foreach (var p in synset.Pointers)
                {
                    if (p.Symbol != "!" || p.Source != i + 1) continue;
                    var target = Load(p.Pos)[p.Offset];
                    if (Same(target.Words[p.Target - 1], to)) return true;
                }
            }
        }
        return false;
    }

    private static bool Has(Synset s, string lemma) => s.Words.Any(w => Same(w, lemma));

    private static bool Same(string word, string lemma) => string.Equals(word, lemma, StringComparison.OrdinalIgnoreCase);

    private static Dictionary<string, Synset> Load(string pos) => Files.GetOrAdd(FileFor(pos), file =>
    {
        var synsets = new Dictionary<string, Synset>();
        foreach (var line in File.ReadLines(Path.Combine(Root, "data." + file)))
        {
            if (line.StartsWith("  ", StringComparison.Ordinal)) continue;   // the licence header
            var f = line.Split(' ');
            var wordCount = int.Parse(f[3], NumberStyles.HexNumber, CultureInfo.InvariantCulture);
            // Adjectives may carry a syntactic marker such as "(a)" or "(ip)" glued to the word.
            var words = Enumerable.Range(0, wordCount).Select(i => f[4 + 2 * i].Split('(')[0]).ToArray();
            var k = 4 + 2 * wordCount;
            var pointerCount = int.Parse(f[k], CultureInfo.InvariantCulture);
            var pointers = Enumerable.Range(0, pointerCount).Select(j =>
            {
                var at = k + 1 + 4 * j;
                var st = f[at + 3];
                return new Pointer(f[at], f[at + 1], f[at + 2],
                    int.Parse(st[..2], NumberStyles.HexNumber, CultureInfo.InvariantCulture),
                    int.Parse(st[2..], NumberStyles.HexNumber, CultureInfo.InvariantCulture));
            }).ToArray();
            synsets[f[0]] = new Synset(words, pointers);
        }
        return synsets;
    });

    // Pointer targets name the part of speech by letter ("s" is an adjective satellite, stored in data.adj); claims name it by word.
    private static string FileFor(string pos) => pos switch
    {
        "n" or "noun" => "noun",
        "v" or "verb" => "verb",
        "a" or "s" or "adj" => "adj",
        "r" or "adv" => "adv",
        _ => throw new ArgumentException($"unknown part of speech '{pos}'", nameof(pos)),
    };
}

/// <summary>A fact that runs only where the WordNet 3.0 data files are installed, and says so when it is skipped.</summary>
public sealed class WordNetFactAttribute : FactAttribute
{
    public WordNetFactAttribute()
    {
        if (!WordNetData.Installed)
            Skip = $"WordNet 3.0 data files not found under {WordNetData.Root}: install the Debian package wordnet-base "
                 + "(apt-get install -y wordnet-base) to check the corpus rows marked wordnet-3.0.";
    }
}
