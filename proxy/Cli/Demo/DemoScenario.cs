using System.Text.Json;

namespace RewriteProxy.Cli.Demo;

/// <summary>A question asked again in other words, or changed in one detail that must keep it apart from the cached one.</summary>
/// <param name="Text">The question as a staff member types it.</param>
/// <param name="Kind">For a near-miss, what differs: year, amount, negation, identifier or opposite.</param>
/// <param name="From">The word(s) of the base question that the near-miss changes; the scripted answers change them too.</param>
/// <param name="To">What they become.</param>
public sealed record NearMiss(string Text, string Kind, string From, string To);

/// <summary>One question of the scenario with everything the scripted upstream and the workload need.</summary>
/// <param name="Question">Asked first, then repeated word for word (or with case and spacing changed).</param>
/// <param name="Paraphrases">The same question in other words: should be semantic hits.</param>
/// <param name="NearMiss">A question one detail away: must not be served from the cache.</param>
/// <param name="Draft">A hypothetical handbook passage that answers the question (the draft lane's answer).</param>
/// <param name="Siblings">Related questions a staff member might also ask (the siblings lane's answer).</param>
public sealed record ScenarioQuestion(string Question, string[] Paraphrases, NearMiss? NearMiss, string Draft, string[] Siblings);

/// <summary>
/// The demo's invented scenario: staff of Fenwick Valley Libraries, a fictional network of nine branches, ask an assistant
/// about their staff handbook. Every name, figure and rule here is made up.
/// </summary>
public static class DemoScenario
{
    public const string Title = "Fenwick Valley Libraries (fictional), staff handbook";

    public const string DraftSystemPrompt =
        "You help staff of Fenwick Valley Libraries search their staff handbook. Write one short paragraph that could be " +
        "the handbook passage answering the question. Do not mention that you are writing a hypothetical passage.";

    public const string SiblingsSystemPrompt =
        "You help staff of Fenwick Valley Libraries search their staff handbook. Write 5 related questions a staff member " +
        "might also ask, one per line, without numbering or any other text.";

    /// <summary>Logical name of the embedded data (the csproj's EmbeddedResource LogicalName).</summary>
    public const string ResourceName = "RewriteProxy.Cli.Demo.demo-scenario.json";

    static readonly Data Loaded = Load();

    /// <summary>Drafts a model writes when it wanders off the question: the drift guard should drop them.</summary>
    public static string[] OffTopicDrafts => Loaded.OffTopicDrafts;

    /// <summary>Lines a siblings answer sometimes carries that have nothing to do with the question.</summary>
    public static string[] OffTopicSiblings => Loaded.OffTopicSiblings;

    /// <summary>Openers a model puts before its list although it was told not to.</summary>
    public static string[] Preambles => Loaded.Preambles;

    /// <summary>
    /// The questions, each with its paraphrases, near-miss, draft and siblings. The paraphrases add no qualifier ("the
    /// library network" for "the network"): the hit decision reads an added qualifier as a change of scope (README).
    /// </summary>
    public static ScenarioQuestion[] Questions => Loaded.Questions;

    sealed record Data(string[] OffTopicDrafts, string[] OffTopicSiblings, string[] Preambles, ScenarioQuestion[] Questions);

    /// <summary>The scenario's data lives in Cli/Demo/Resources/demo-scenario.json: text, not code.</summary>
    static Data Load()
    {
        using var stream = typeof(DemoScenario).Assembly.GetManifestResourceStream(ResourceName)
            ?? throw new InvalidOperationException($"embedded resource {ResourceName} is missing from the build");
        return JsonSerializer.Deserialize<Data>(stream, new JsonSerializerOptions(JsonSerializerDefaults.Web))
            ?? throw new InvalidDataException($"{ResourceName} is empty");
    }
}
