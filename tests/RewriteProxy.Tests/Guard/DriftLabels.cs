using System.Runtime.CompilerServices;
using System.Text.Json;

namespace RewriteProxy.Tests.Guard;

/// <summary>One question of Data/drift-labels.jsonl with its labelled rewrites (invented scenarios).</summary>
public sealed record DriftLabel(
    string Scenario,
    string Question,
    string[] SiblingsOn,
    string[] SiblingsOff,
    string[] DraftsOn,
    string[] DraftsOff)
{
    /// <summary>Every labelled question; the file is read beside this source file, so no copy to the output folder is needed.</summary>
    public static IReadOnlyList<DriftLabel> Load()
    {
        var path = Path.Combine(Path.GetDirectoryName(ThisFile())!, "Data", "drift-labels.jsonl");
        var options = new JsonSerializerOptions(JsonSerializerDefaults.Web);
        return File.ReadLines(path)
            .Where(l => !string.IsNullOrWhiteSpace(l))
            .Select(l => JsonSerializer.Deserialize<DriftLabel>(l, options)!)
            .ToList();
    }

    static string ThisFile([CallerFilePath] string here = "") => here;
}
