using System.Text.Json;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;
using RewriteProxy.Tests.Corpus;

namespace RewriteProxy.Tests.Clients;

/// <summary>
/// The scripted upstream of the LangChain client tests: it reads each rewrite prompt the way a model would (it knows
/// the prompts of tests/clients/langchain-calls.mjs and LangChain's own), finds the question, and answers what that
/// prompt asks, in the format it asks for: tags for MultiQueryRetriever, a numbered list, a JSON array, plain lines,
/// a passage. Siblings come from the corpus' labelled sibling sets; questions of the hit pairs, which have none,
/// get three on-topic siblings and a passage written from the question.
/// </summary>
public static class ScriptedAnswers
{
    static readonly Dictionary<string, SiblingSet> Sets = HitCorpus.LoadSiblings(CorpusPart.Test)
        .ToDictionary(s => s.Question, StringComparer.Ordinal);

    // How each prompt of the client script marks its question: (app, pattern with a group q).
    static readonly (string App, Regex Pattern)[] Prompts =
    [
        ("multiquery", new Regex(@"<questions>[\s\S]*Original question: (?<q>.+)$")),
        ("hyde", new Regex(@"^Please write a passage to answer the question\nQuestion: (?<q>[\s\S]+)\nPassage:$")),
        ("inhouse-numbered", new Regex("\"\"\"\n(?<q>[\\s\\S]+)\n\"\"\"")),
        ("inhouse-json", new Regex(@"\n<<<(?<q>[\s\S]+)>>>\n")),
        ("inhouse-unmarked", new Regex(@"^We run a help centre for a regional transit operator\.\n\n(?<q>[\s\S]+)\n\nList related")),
        ("inhouse-draft", new Regex(@"<question>(?<q>[\s\S]+)</question>")),
    ];

    static readonly Regex Marker = new(@"^\s*(?:\d{1,2}[.)]|[-*•])\s*");

    public static string Answer(JsonNode request)
    {
        var messages = request["messages"]!.AsArray();
        var last = messages.Last(m => m!["role"]!.GetValue<string>() == "user")!["content"]!.GetValue<string>();
        var (app, question) = Recognise(last);
        var draft = app is "hyde" or "inhouse-draft" || (app == "bare" && request["model"]?.GetValue<string>() == BareDraftModel);
        if (draft) return Passage(question);

        var lines = Sets.TryGetValue(question, out var set) ? Lines(set) : Made(question);
        return app switch
        {
            "multiquery" => "<questions>\n" + string.Join("\n", lines) + "\n</questions>",
            "inhouse-numbered" => string.Join("\n", lines.Select((l, i) => $"{i + 1}. {l}")),
            "inhouse-json" => JsonSerializer.Serialize(lines),
            // An app that asks for "one per line" gets what the model wrote, preamble, numbers and all.
            "inhouse-unmarked" when set is not null => set.Answer,
            _ => string.Join("\n", lines),
        };
    }

    /// <summary>The model the bare draft app names: bare calls of both lanes send only the question, so the model tells them apart.</summary>
    public const string BareDraftModel = "gpt-4o-mini-drafts";

    static (string App, string Question) Recognise(string text)
    {
        foreach (var (app, pattern) in Prompts)
            if (pattern.Match(text) is { Success: true } m) return (app, m.Groups["q"].Value.Trim());
        return ("bare", text.Trim());
    }

    /// <summary>The set's candidate lines in the order the model wrote them, without list markers or preamble.</summary>
    static List<string> Lines(SiblingSet set)
    {
        var labelled = set.OnTopic.Concat(set.OffTopic).ToHashSet(StringComparer.Ordinal);
        return set.Answer.Split('\n').Select(l => Marker.Replace(l, "").Trim()).Where(labelled.Contains).ToList();
    }

    /// <summary>
    /// Three on-topic siblings for a question the corpus has none for, each about the second half of the question:
    /// the whole question inside a sibling is an echo (drift 0.02–0.13 in a one-off run on 12 questions), half of it
    /// drifts 0.04–0.41.
    /// </summary>
    static List<string> Made(string question)
    {
        var words = question.TrimEnd('?', ' ').Split(' ');
        var half = string.Join(' ', words.Skip(words.Length / 2)).ToLowerInvariant();
        return
        [
            $"Where can I read the policy on {half}?",
            $"How long does it take to sort out {half}?",
            $"What happens next with {half}?",
        ];
    }

    /// <summary>A passage that answers the question in general terms, as a HyDE draft does.</summary>
    public static string Passage(string question) =>
        $"{question.TrimEnd('?', ' ')}? In short: the answer depends on your situation, and the help centre's guidance on " +
        "this explains who it applies to, the steps to follow and the documents to bring.";
}
