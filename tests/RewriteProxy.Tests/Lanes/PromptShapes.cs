namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// Rewrite prompts as apps send them, for the question-location tests. The two LangChain ones are copied from
/// @langchain/classic 1.0.50 (dist/retrievers/multi_query.js DEFAULT_QUERY_PROMPT with queryCount 3, and
/// dist/retrievers/hyde.js key "websearch"); the in-house ones are invented the way an app team would write them.
/// </summary>
public static class PromptShapes
{
    public static string MultiQuery(string question) => $"""
        You are an AI language model assistant. Your task is
        to generate 3 different versions of the given user
        question to retrieve relevant documents from a vector database.
        By generating multiple perspectives on the user question,
        your goal is to help the user overcome some of the limitations
        of distance-based similarity search.

        Provide these alternative questions separated by newlines between XML tags. For example:

        <questions>
        Question 1
        Question 2
        Question 3
        </questions>

        Original question: {question}
        """.ReplaceLineEndings("\n");

    public static string Hyde(string question) => $"Please write a passage to answer the question\nQuestion: {question}\nPassage:";

    /// <summary>In-house: the question between triple quotes, no label, output instructions after it.</summary>
    public static string TripleQuoted(string question) =>
        $"Write four short search queries that would find documents answering the customer's message below.\n\"\"\"\n{question}\n\"\"\"\nOne query per line, numbered, nothing else.";

    /// <summary>In-house: the question between &lt;&lt;&lt; &gt;&gt;&gt;, no label, JSON output asked for.</summary>
    public static string Angled(string question) =>
        $"Rephrase the text between <<< and >>> as three different search questions.\n<<<{question}>>>\nAnswer with a JSON array of strings.";

    /// <summary>In-house with no marker any recogniser knows: the question is a paragraph between instructions.</summary>
    public static string Unmarked(string question) =>
        $"We run a help centre for a regional transit operator.\n\n{question}\n\nList related questions a rider might also ask, one per line.";

    /// <summary>Invented questions from the fictional scenarios of the labelled list.</summary>
    public static readonly string[] Questions =
    [
        "How do I report a leaking water meter?",
        "What happens if I return a bike to a full docking station?",
        "When are visiting hours on the maternity ward?",
        "Can I bring my dog on the ridge trail in winter?",
        "Which documents do I need to enrol my child in year one?",
        "How long can I keep a borrowed e-book from the library?",
    ];
}
