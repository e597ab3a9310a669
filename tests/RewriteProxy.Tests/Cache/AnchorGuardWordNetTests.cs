using System.Diagnostics;
using RewriteProxy.Cache;

using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// Checks the contrast table and the guard against WordNet 3.0 itself (Princeton University; the Debian package
/// wordnet-base installs its database under /usr/share/wordnet). The antonym pairs are read here from WordNet's
/// own data files by a parser independent of scripts/wordnet-antonyms.py.
/// </summary>
public sealed class AnchorGuardWordNetTests
{
    const string WordNetDir = "/usr/share/wordnet";
    const string TablePath = "proxy/Cache/Resources/antonyms.tsv";
    const string Generator = "scripts/wordnet-antonyms.py";

    /// <summary>The template of the refusal check; pairs that touch its own words cannot differ "only by the pair".</summary>
    const string Template = "Is {0} allowed here?";
    static readonly HashSet<string> TemplateWords = ["is", "allowed", "allow", "here"];

    static void RequireWordNet()
    {
        if (!File.Exists(Path.Combine(WordNetDir, "data.adj")))
            Assert.Fail($"WordNet 3.0 is not installed at {WordNetDir}: run scripts/test.sh, which installs the Debian package wordnet-base.");
    }

    /// <summary>Single-word antonym pairs ('!' pointers) of one WordNet 3.0 data file, lower-case.</summary>
    static List<(string A, string B)> ReadPairs(string file)
    {
        var lines = File.ReadAllLines(Path.Combine(WordNetDir, file), System.Text.Encoding.Latin1).Where(l => !l.StartsWith("  ")).ToList();
        var words = new Dictionary<string, string[]>();
        var pointers = new List<(string Offset, string Target, string Pos, int Source, int TargetWord)>();
        foreach (var line in lines)
        {
            var f = line.Split(" | ")[0].Split(' ', StringSplitOptions.RemoveEmptyEntries);
            var count = Convert.ToInt32(f[3], 16);
            words[f[0]] = Enumerable.Range(0, count)
                .Select(i => System.Text.RegularExpressions.Regex.Replace(f[4 + 2 * i], @"\((a|p|ip)\)$", "").ToLowerInvariant()).ToArray();
            var at = 4 + 2 * count;
            var n = int.Parse(f[at++]);
            for (var p = 0; p < n; p++, at += 4)
                if (f[at] == "!")
                    pointers.Add((f[0], f[at + 1], f[at + 2], Convert.ToInt32(f[at + 3][..2], 16), Convert.ToInt32(f[at + 3][2..], 16)));
        }
        // Antonym pointers stay within one part of speech (satellites point to head adjectives in the same file).
        return pointers
            .Select(p => (words[p.Offset][p.Source - 1], words[p.Target][p.TargetWord - 1]))
            .Where(p => p.Item1.All(char.IsAsciiLetterLower) && p.Item2.All(char.IsAsciiLetterLower) && p.Item1 != p.Item2)
            .ToList();
    }

    static IEnumerable<(string A, string B)> AllPairs() =>
        new[] { "data.noun", "data.verb", "data.adj", "data.adv" }.SelectMany(ReadPairs);

    [Fact]
    public void Questions_differing_only_by_a_WordNet_antonym_pair_are_refused()
    {
        RequireWordNet();
        var guard = new AnchorGuard();
        var ignored = AnchorAntonyms.Ignored.SelectMany(p => new[] { (p.Word, p.Antonym), (p.Antonym, p.Word) }).ToHashSet();
        var pairs = AllPairs()
            .Where(p => !ignored.Contains(p) && !TemplateWords.Contains(p.A) && !TemplateWords.Contains(p.B))
            .Distinct().ToList();
        Assert.True(pairs.Count > 3000, $"only {pairs.Count} WordNet 3.0 antonym pairs read");

        var agreed = pairs
            .Where(p => guard.Compare(string.Format(Template, p.A), string.Format(Template, p.B)).Agree)
            .Select(p => $"{p.A}/{p.B}").ToList();
        Assert.True(agreed.Count == 0, $"{agreed.Count} of {pairs.Count} WordNet 3.0 pairs passed the guard: {string.Join(", ", agreed.Take(30))}");
    }

    [Fact]
    public void Every_single_word_WordNet_antonym_pair_is_in_the_shipped_table()
    {
        RequireWordNet();
        var table = File.ReadAllLines(Path.Combine(RepositoryRoot.Path, TablePath))
            .Where(l => !l.StartsWith('#')).Select(l => l.Split('\t')).Select(f => (f[0], f[1])).ToHashSet();
        var missing = AllPairs().Where(p => !table.Contains(p) || !table.Contains((p.B, p.A))).Select(p => $"{p.A}/{p.B}").ToList();
        Assert.True(missing.Count == 0, $"missing from {TablePath}: {string.Join(", ", missing.Take(30))}");
    }

    [Fact]
    public async Task Shipped_table_is_what_the_generator_makes_from_WordNet()
    {
        RequireWordNet();
        var root = RepositoryRoot.Path;
        var start = new ProcessStartInfo("python3", [Generator, "--wordnet", WordNetDir])
        {
            WorkingDirectory = root, RedirectStandardOutput = true, RedirectStandardError = true,
        };
        string generated;
        try
        {
            using var process = Process.Start(start)!;
            var stdout = process.StandardOutput.ReadToEndAsync();
            var stderr = await process.StandardError.ReadToEndAsync();
            await process.WaitForExitAsync();
            generated = await stdout;
            Assert.True(process.ExitCode == 0, $"{Generator} failed: {stderr}");
        }
        catch (System.ComponentModel.Win32Exception e)
        {
            Assert.Fail($"python3 is needed to run {Generator}: {e.Message}");
            return;
        }

        var committed = File.ReadAllText(Path.Combine(root, TablePath));
        Assert.True(generated == committed, $"{TablePath} is stale: run {Generator} --out {TablePath}");

        using var resource = typeof(AnchorGuard).Assembly.GetManifestResourceStream(AnchorAntonyms.ResourceName);
        Assert.NotNull(resource);
        Assert.Equal(committed, await new StreamReader(resource).ReadToEndAsync());
    }
}
