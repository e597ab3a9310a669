using System.Text.Json.Nodes;
using RewriteProxy.Guard;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Guard;

/// <summary>
/// Kept siblings are written back in the container the model used. The parsers here mirror what the clients do; the
/// end-to-end client tests run the clients' own parsers (LangChain's LineListOutputParser) on the proxy's answers.
/// </summary>
public sealed class SiblingContainerTests
{
    const string On1 = "Where can I return a rental bike when the dock is full?";
    const string On2 = "Do I get charged extra if no docking point is free?";
    const string On3 = "How do I find a nearby station with free docks?";
    const string Off = "What is the best pizza place downtown?";

    /// <summary>LineListOutputParser.parse of @langchain/classic 1.0.50, line for line.</summary>
    static List<string> LineList(string text)
    {
        var start = text.IndexOf("<questions>", StringComparison.Ordinal);
        var end = text.IndexOf("</questions>", StringComparison.Ordinal);
        var from = start == -1 ? 0 : start + 11;
        var to = end == -1 ? text.Length : end;
        return text[from..to].Trim().Split('\n').Where(l => l.Trim() != "").ToList();
    }

    static string Render(string completion, params string[] kept)
    {
        var container = SiblingContainer.Read(completion, CandidateRule.Questions);
        Assert.True(container.Renders, $"not read as a container: {completion}");
        return container.Render(kept)!;
    }

    [Fact]
    public void Xml_style_tags_keep_their_tags_and_the_parser_gets_the_direct_list_less_the_dropped_line()
    {
        var completion = $"<questions>\n{On1}\n{Off}\n{On2}\n{On3}\n</questions>";
        var container = SiblingContainer.Read(completion, CandidateRule.Questions);
        Assert.Equal(ContainerKind.Tags, container.Kind);
        Assert.Equal([On1, Off, On2, On3], container.Candidates);

        // The guard returns kept siblings in selection order; the container puts them back in the model's order.
        var answer = container.Render([On3, On1, On2])!;
        Assert.Equal($"<questions>\n{On1}\n{On2}\n{On3}\n</questions>", answer);
        Assert.Equal(LineList(completion).Where(l => l != Off), LineList(answer));
    }

    [Fact]
    public void A_preamble_and_a_closing_remark_around_tags_stay_as_the_model_wrote_them()
    {
        var completion = $"Here are three versions:\n\n<questions>\n{On1}\n{Off}\n</questions>\n\nHope this helps!";
        Assert.Equal($"Here are three versions:\n\n<questions>\n{On1}\n</questions>\n\nHope this helps!", Render(completion, On1));
    }

    [Fact]
    public void A_numbered_list_keeps_each_kept_line_with_its_own_number()
    {
        var completion = $"1. {On1}\n2. {Off}\n3. {On2}";
        var container = SiblingContainer.Read(completion, CandidateRule.Questions);
        Assert.Equal(ContainerKind.Numbered, container.Kind);
        Assert.Equal($"1. {On1}\n3. {On2}", container.Render([On2, On1]));
    }

    [Fact]
    public void A_bulleted_list_keeps_its_bullets()
    {
        var completion = $"- {Off}\n- {On1}\n- {On2}";
        Assert.Equal($"- {On1}\n- {On2}", Render(completion, On1, On2));
    }

    [Fact]
    public void A_json_array_is_written_again_with_the_kept_strings_in_the_models_indentation()
    {
        var pretty = $"[\n  \"{On1}\",\n  \"{Off}\",\n  \"{On2}\"\n]";
        var answer = Render(pretty, On1, On2);
        Assert.Equal($"[\n  \"{On1}\",\n  \"{On2}\"\n]", answer);

        var oneLine = $"[\"{Off}\", \"{On1}\", \"{On2}\"]";
        Assert.Equal($"[\"{On1}\", \"{On2}\"]", Render(oneLine, On1, On2));
    }

    [Fact]
    public void A_json_object_keeps_its_other_members_and_filters_its_list()
    {
        var completion = $"{{\"queries\": [\"{On1}\", \"{Off}\"], \"count\": 2}}";
        var answer = JsonNode.Parse(Render(completion, On1))!;
        Assert.Equal([On1], answer["queries"]!.AsArray().Select(n => n!.GetValue<string>()));
        Assert.Equal(2, answer["count"]!.GetValue<int>());
    }

    [Fact]
    public void A_code_fence_around_json_or_lines_is_kept()
    {
        var json = $"```json\n[\"{On1}\", \"{Off}\"]\n```";
        Assert.Equal($"```json\n[\"{On1}\"]\n```", Render(json, On1));

        var lines = $"```\n{On1}\n{Off}\n{On2}\n```";
        var container = SiblingContainer.Read(lines, CandidateRule.Questions);
        Assert.Equal(ContainerKind.Fence, container.Kind);
        Assert.Equal($"```\n{On1}\n{On2}\n```", container.Render([On1, On2]));
    }

    [Fact]
    public void Crlf_line_ends_are_kept()
    {
        var completion = $"<questions>\r\n{On1}\r\n{Off}\r\n</questions>";
        Assert.Equal($"<questions>\r\n{On1}\r\n</questions>", Render(completion, On1));
    }

    [Fact]
    public void Mixed_markers_are_plain_and_leave_the_answer_to_the_guard()
    {
        var completion = $"Here are some related questions:\n1. {On1}\n- {On2}\n\"{On3}\"";
        var container = SiblingContainer.Read(completion, CandidateRule.Questions);
        Assert.Equal(ContainerKind.Plain, container.Kind);
        Assert.Null(container.Render([On1]));
        Assert.Equal(SiblingParser.Parse(completion, CandidateRule.Questions), container.Candidates);
    }

    [Fact]
    public void The_fallback_puts_the_question_alone_in_the_container()
    {
        const string question = "What happens if I return a bike to a full docking station?";
        string Only(string completion) => SiblingFallback.Content(question, SiblingContainer.Read(completion, CandidateRule.Questions));

        Assert.Equal($"<questions>\n{question}\n</questions>", Only($"<questions>\n{Off}\n</questions>"));
        Assert.Equal($"1. {question}", Only($"1. {Off}\n2. What time is it in Lisbon?"));
        Assert.Equal($"[\"{question}\"]", Only($"[\"{Off}\"]"));
        Assert.Equal(question, Only(Off));
        Assert.Equal([question], LineList(Only($"<questions>\n{Off}\n</questions>")));
    }
}
