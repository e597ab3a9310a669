namespace RewriteProxy.Cache;

/// <summary>What differs between two questions once their words are aligned (longest common subsequence on lemmas).</summary>
/// <param name="NovelAsked">Words of the asked question that nothing in the cached one explains (not the same lemma, a WordNet synonym, a derived form or an abbreviation).</param>
/// <param name="NovelCached">The same for the cached question.</param>
/// <param name="Substitutions">Gaps of the alignment where both questions have an unexplained word in the same place: a word replaced by another.</param>
/// <param name="Swap">Two gaps that trade their words ("the buyer pays the seller" / "the seller pays the buyer"), or null.</param>
public sealed record QuestionDiff(IReadOnlyList<string> NovelAsked, IReadOnlyList<string> NovelCached, int Substitutions, string? Swap)
{
    public int Novel => NovelAsked.Count + NovelCached.Count;

    /// <summary>Each gap of the alignment that holds a novel word: the positions of its novel words in each question.</summary>
    internal IReadOnlyList<(int[] Asked, int[] Cached)> Gaps { get; init; } = [];

    /// <summary>Content words of the asked question matched in order to one of the cached question (the same lemma).</summary>
    internal int Aligned { get; init; }

    /// <summary>Content words outside the alignment that another word explains: moved, a synonym, a derived form, an abbreviation.</summary>
    internal int ExplainedWords { get; init; }

    internal static QuestionDiff Compare(QuestionWords a, QuestionWords b, WordSenses senses, List<string>? trace = null)
    {
        var matches = Align(a, b);
        var novelA = new List<string>();
        var novelB = new List<string>();
        var gaps = new List<(List<int> A, List<int> B)>();
        int pa = -1, pb = -1;
        foreach (var (i, j) in matches.Append((a.Count, b.Count)))
        {
            var gapA = Enumerable.Range(pa + 1, i - pa - 1).Where(k => a.Classes[k] is WordClass.Content or WordClass.Particle).ToList();
            var gapB = Enumerable.Range(pb + 1, j - pb - 1).Where(k => b.Classes[k] is WordClass.Content or WordClass.Particle).ToList();
            if (gapA.Count > 0 || gapB.Count > 0) gaps.Add((gapA, gapB));
            pa = i;
            pb = j;
        }

        var swap = Permuted(a.Words, b.Words, clausesMove: true, out var reordered) ?? PronounTrade(a, b);
        var byA = a.Words.Count(w => w == "by");
        var byB = b.Words.Count(w => w == "by");
        // A passive agent ("released by the card issuer" / "the card issuer releases") moves a part without changing its
        // role; the same words reordered were judged above.
        for (var x = 0; x < gaps.Count && swap is null && byA == byB && !reordered; x++)
            for (var y = x + 1; y < gaps.Count && swap is null; y++)
                if (SameContent(a, gaps[x].A, b, gaps[y].B) && SameContent(b, gaps[x].B, a, gaps[y].A))
                    swap = $"'{Text(a, gaps[x].A)}' and '{Text(a, gaps[y].A)}' trade places";

        var substitutions = 0;
        var explained = 0;
        var novelGaps = new List<(int[], int[])>();
        foreach (var (gapA, gapB) in gaps)
        {
            var openA = gapA.Where(k => !Explained(a, k, b, senses, trace)).ToList();
            var openB = gapB.Where(k => !Explained(b, k, a, senses, trace)).ToList();
            explained += gapA.Count(k => a.Classes[k] == WordClass.Content && !openA.Contains(k))
                + gapB.Count(k => b.Classes[k] == WordClass.Content && !openB.Contains(k));
            // A particle counts only where the other question has something unexplained in its place ("opt in" / "opt out"),
            // not where a rewording adds one ("who cleans" / "by whom is ... cleaned").
            var twoSided = openA.Count > 0 && openB.Count > 0;
            var na = openA.Where(k => twoSided || a.Classes[k] == WordClass.Content).ToList();
            var nb = openB.Where(k => twoSided || b.Classes[k] == WordClass.Content).ToList();
            novelA.AddRange(na.Select(k => a.Words[k]));
            novelB.AddRange(nb.Select(k => b.Words[k]));
            if (na.Count > 0 && nb.Count > 0) substitutions++;
            if (na.Count > 0 || nb.Count > 0) novelGaps.Add(([.. na], [.. nb]));
        }
        return new QuestionDiff(novelA, novelB, substitutions, swap)
        {
            Gaps = novelGaps,
            Aligned = matches.Count(m => a.Classes[m.Item1] == WordClass.Content),
            ExplainedWords = explained,
        };
    }

    static string Text(QuestionWords q, List<int> at) => string.Join(' ', at.Select(k => q.Words[k]));

    /// <summary>Both gaps have content words, and each content word of one has the same lemma in the other.</summary>
    static bool SameContent(QuestionWords a, List<int> gapA, QuestionWords b, List<int> gapB)
    {
        var ca = gapA.Where(i => a.Classes[i] == WordClass.Content).ToList();
        var cb = gapB.Where(j => b.Classes[j] == WordClass.Content).ToList();
        return ca.Count > 0 && cb.Count > 0
            && ca.All(i => cb.Any(j => SameLemma(a.Lemmas[i], b.Lemmas[j])))
            && cb.All(j => ca.Any(i => SameLemma(a.Lemmas[i], b.Lemmas[j])));
    }

    /// <summary>
    /// The same words, two parts trading places around a verb ("Can a carer bring a companion pass holder" / "Can a
    /// companion pass holder bring a carer"). Clauses moved as a whole ("If I miss a resit, do I …" / "Do I … if I miss a
    /// resit") and lists in another order ("bank or building society") are not such a trade.
    /// </summary>
    static string? Permuted(string[] a, string[] b, bool clausesMove, out bool reordered)
    {
        reordered = false;
        if (a.Length != b.Length || a.SequenceEqual(b)) return null;
        if (!a.Order(StringComparer.Ordinal).SequenceEqual(b.Order(StringComparer.Ordinal))) return null;
        reordered = true;
        for (var k = 1; k < a.Length; k++)
            if (a[k..].Concat(a[..k]).SequenceEqual(b)) return null;
        // The stretch that differs: X · middle · Y in one, Y · middle · X in the other.
        int first = 0, last = a.Length - 1;
        while (a[first] == b[first]) first++;
        while (a[last] == b[last]) last--;
        var x = a[first..(last + 1)];
        var y = b[first..(last + 1)];
        for (var lx = 1; lx < x.Length; lx++)
            for (var ly = 1; lx + ly <= x.Length; ly++)
            {
                var middle = x[lx..^ly];
                if (!y.SequenceEqual(x[^ly..].Concat(middle).Concat(x[..lx]))) continue;
                // "a porch and a new path" / "a new path and a porch": a list in another order asks the same.
                if (middle.All(w => w is "and" or "or" or "to" or "a" or "an" or "the" or "nor" or "with")) return null;
                // A clause moved with its subject or opener ("Once I submit a claim, who approves it?") is not a trade of roles.
                if (clausesMove && x[..lx].Concat(x[^ly..]).Any(HitLexicon.ClauseWords.Contains)) return null;
                // Something that acts between them: a verb ("pay", "need"), not only articles, possessives and "is".
                if (middle.Any(w => !HitLexicon.Linking.Contains(w)))
                    return $"'{string.Join(' ', x[..lx])}' and '{string.Join(' ', x[^ly..])}' trade places around '{string.Join(' ', middle)}'";
            }
        return null;
    }

    static readonly (string Subject, string Object)[] PronounCases = [("i", "me"), ("we", "us"), ("he", "him"), ("they", "them")];

    /// <summary>
    /// Parts that trade places while a pronoun changes case ("Does my employer have to tell me" / "Do I have to tell my
    /// employer"): the same words once pronouns and auxiliaries are read in one form, traded around a verb.
    /// </summary>
    static string? PronounTrade(QuestionWords a, QuestionWords b)
    {
        if (!PronounCases.Any(p => a.Words.Count(w => w == p.Subject) != b.Words.Count(w => w == p.Subject)
                                   && a.Words.Count(w => w == p.Object) != b.Words.Count(w => w == p.Object))) return null;
        return Permuted(Plain(a.Words), Plain(b.Words), clausesMove: false, out _);

        static string[] Plain(string[] words) => words.Select(w => w switch
        {
            "me" => "i", "us" => "we", "him" => "he", "them" => "they", "does" or "did" => "do", "has" or "had" => "have",
            "am" or "is" or "are" or "was" or "were" => "be",
            _ => w,
        }).ToArray();
    }

    static bool SameLemma(string[] x, string[] y)
    {
        foreach (var l in x)
            if (Array.IndexOf(y, l) >= 0) return true;
        return false;
    }

    /// <summary>Longest common subsequence of the two word lists, two words matching when they share a lemma; pairs in order.</summary>
    static List<(int, int)> Align(QuestionWords a, QuestionWords b)
    {
        int n = a.Count, m = b.Count;
        var table = new int[n + 1, m + 1];
        for (var i = n - 1; i >= 0; i--)
            for (var j = m - 1; j >= 0; j--)
                table[i, j] = SameLemma(a.Lemmas[i], b.Lemmas[j]) ? table[i + 1, j + 1] + 1 : Math.Max(table[i + 1, j], table[i, j + 1]);
        var pairs = new List<(int, int)>();
        for (int i = 0, j = 0; i < n && j < m;)
        {
            if (SameLemma(a.Lemmas[i], b.Lemmas[j])) { pairs.Add((i, j)); i++; j++; }
            else if (table[i + 1, j] >= table[i, j + 1]) i++;
            else j++;
        }
        return pairs;
    }

    /// <summary>
    /// Word <paramref name="k"/> of <paramref name="q"/> means something the other question also says: the same
    /// lemma anywhere (a moved word), a WordNet synonym or derived form of one of its words or two-word compounds,
    /// an abbreviation of its words ("HR" / "human resources", "appt" / "appointment"), or it is itself part of a
    /// compound that is.
    /// </summary>
    static bool Explained(QuestionWords q, int k, QuestionWords other, WordSenses senses, List<string>? trace)
    {
        foreach (var unit in q.Units)
        {
            if (k < unit.Start || k >= unit.Start + unit.Length) continue;
            foreach (var otherUnit in other.Units)
                foreach (var x in unit.Lemmas)
                    foreach (var y in otherUnit.Lemmas)
                        if (senses.SameSense(x, y) || HitLexicon.Synonyms.Contains((x, y)) || HitLexicon.Synonyms.Contains((y, x)))
                        {
                            trace?.Add($"{q.Words[k]}: {x} ~ {y}");
                            return true;
                        }
        }
        var abbreviation = Abbreviates(q, k, other) || AbbreviatedBy(q, k, other)
            || (HitLexicon.ShortForms.TryGetValue(q.Words[k], out var full) && other.Words.Contains(full))
            || other.Words.Any(w => HitLexicon.ShortForms.TryGetValue(w, out var f) && f == q.Words[k]);
        trace?.Add($"{q.Words[k]}: {(abbreviation ? "abbreviation" : "unexplained")}");
        return abbreviation;
    }

    /// <summary>Word k is an abbreviation of words in the other question: their initials ("IDP"), or their letters in order from the first ("appt", "ID").</summary>
    static bool Abbreviates(QuestionWords q, int k, QuestionWords other)
    {
        var word = q.Words[k];
        var raw = q.Raw[k];
        var looksAbbreviated = raw.Length >= 2 && !HitLexicon.Function.Contains(word) && !HitLexicon.Particles.Contains(word)
            && (raw.Count(char.IsUpper) >= 2 || !WordSenses.Default.Knows(word));
        if (!looksAbbreviated || word.Length < 2) return false;
        for (var s = 0; s + word.Length <= other.Count; s++)
        {
            var initials = true;
            for (var c = 0; c < word.Length && initials; c++) initials = other.Words[s + c][0] == word[c];
            if (initials) return true;
        }
        foreach (var w in other.Words)
            if (w.Length >= word.Length + 2 && w[0] == word[0] && IsSubsequence(word, w)) return true;
        return false;
    }

    static bool AbbreviatedBy(QuestionWords q, int k, QuestionWords other)
    {
        for (var j = 0; j < other.Count; j++)
        {
            var abbreviation = other.Words[j];
            var raw = other.Raw[j];
            if (abbreviation.Length < 2 || HitLexicon.Function.Contains(abbreviation) || HitLexicon.Particles.Contains(abbreviation)
                || !(raw.Count(char.IsUpper) >= 2 || !WordSenses.Default.Knows(abbreviation))) continue;
            // k is one of the words the initials stand for, or the word the letters come from.
            for (var s = Math.Max(0, k - abbreviation.Length + 1); s <= k && s + abbreviation.Length <= q.Count; s++)
            {
                var initials = true;
                for (var c = 0; c < abbreviation.Length && initials; c++) initials = q.Words[s + c][0] == abbreviation[c];
                if (initials) return true;
            }
            var w = q.Words[k];
            if (w.Length >= abbreviation.Length + 2 && w[0] == abbreviation[0] && IsSubsequence(abbreviation, w)) return true;
        }
        return false;
    }

    static bool IsSubsequence(string small, string large)
    {
        var i = 0;
        foreach (var c in large)
            if (i < small.Length && small[i] == c) i++;
        return i == small.Length;
    }
}
