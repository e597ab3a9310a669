using System.Globalization;
using System.Net.Http.Headers;
using System.Numerics.Tensors;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// Question location on the wire: templated prompts through the lanes with no QuestionPattern, the unlocated path,
/// templates surviving a restart, and what /admin/stats shows. Invented questions; the oracle for drift is an
/// independent cosine (System.Numerics.Tensors.TensorPrimitives.CosineSimilarity) over the model's vectors.
/// </summary>
public sealed class QuestionLocationLaneTests : IAsyncLifetime
{
    const string Token = "admin-token-for-question-tests";
    ScriptedUpstream _upstream = null!;

    public async Task InitializeAsync() => _upstream = await ScriptedUpstream.StartAsync();
    public async Task DisposeAsync() => await _upstream.DisposeAsync();

    static double Drift(string question, string rewrite)
    {
        var v = SharedEmbedder.Instance.Embed([question, rewrite]);
        return 1 - TensorPrimitives.CosineSimilarity(v[0], v[1]);
    }

    /// <summary>A siblings lane no other test uses: metrics are process-wide, so the counter test reads its own lane.</summary>
    const string OwnLane = "riders-siblings";

    Task<TestProxy> StartAsync(string? store = null) => TestProxy.StartAsync(_upstream.BaseUrl, new Dictionary<string, string?>
    {
        ["Admin:Token"] = Token,
        ["Store:Path"] = store ?? TestProxy.NewStorePath(),
        [$"Lanes:{OwnLane}:Kind"] = "siblings",
    });

    static Task<LaneReply> AskAsync(TestProxy proxy, string lane, string userMessage, string? system = null) =>
        proxy.Client.PostLaneAsync(lane, LaneCalls.Request(userMessage, system: system));

    static async Task<JsonNode> StatsAsync(TestProxy proxy)
    {
        using var request = new HttpRequestMessage(HttpMethod.Get, "/admin/stats");
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", Token);
        using var response = await proxy.Client.SendAsync(request);
        return JsonNode.Parse(await response.Content.ReadAsStringAsync())!;
    }

    static async Task<double> MetricAsync(TestProxy proxy, string series)
    {
        var text = await proxy.Client.GetStringAsync("/metrics");
        var m = Regex.Match(text, "^" + Regex.Escape(series) + @" (\S+)$", RegexOptions.Multiline);
        return m.Success ? double.Parse(m.Groups[1].Value, CultureInfo.InvariantCulture) : 0;
    }

    [Fact]
    public async Task Drift_is_measured_against_the_located_question_not_the_template()
    {
        const string question = "When does the ferry to the north island leave on Sundays?";
        const string passage = "On Sundays the first ferry to the north island leaves the harbour at 08:30 and the last one at 18:00.";
        _upstream.Completion = _ => passage;
        await using var proxy = await StartAsync();

        var reply = await AskAsync(proxy, "draft", PromptShapes.Hyde(question));

        Assert.Equal("label", reply.Header("X-Rewrite-Question"));
        var reported = double.Parse(reply.Header("X-Rewrite-Drift")!, CultureInfo.InvariantCulture);
        Assert.Equal(Drift(question, passage), reported, 3);
        Assert.NotEqual(Math.Round(Drift(PromptShapes.Hyde(question), passage), 3), Math.Round(reported, 3));
    }

    [Fact]
    public async Task A_paraphrase_in_the_same_template_is_a_semantic_hit_and_its_question_alone_is_compared()
    {
        _upstream.Completion = request => "Passage: " + ((string)request["messages"]![0]!["content"]!).Split('\n')[1];
        await using var proxy = await StartAsync();

        var miss = await AskAsync(proxy, "draft", PromptShapes.Hyde("What are the visiting hours on the maternity ward?"));
        var hit = await AskAsync(proxy, "draft", PromptShapes.Hyde("When are visiting hours on the maternity ward?"));

        Assert.Equal("miss", miss.Cache);
        Assert.Equal("hit-semantic", hit.Cache);
        Assert.Equal(miss.Content, hit.Content);
    }

    [Fact]
    public async Task An_unlocated_message_is_cached_only_exactly_and_its_rewrites_only_observed()
    {
        // Several lines, no marker, no template yet: the question cannot be told from the instruction.
        string Prompt(string q) => $"Our riders ask about the tram network.\n{q}\nAnswer with related questions.";
        const string offTopic = "What is the boiling point of olive oil?";
        _upstream.Completion = _ => "Can I buy a tram ticket on board?\n" + offTopic;
        await using var proxy = await StartAsync();
        var before = await MetricAsync(proxy, $"rewriteproxy_question_unlocated_total{{lane=\"{OwnLane}\"}}");

        var first = await AskAsync(proxy, OwnLane, Prompt("Do trams run after midnight?"));
        var repeat = await AskAsync(proxy, OwnLane, Prompt("Do trams run after midnight?"));
        var paraphrase = await AskAsync(proxy, OwnLane, Prompt("Are trams running after midnight?"));

        Assert.Equal("unlocated", first.Header("X-Rewrite-Question"));
        Assert.Equal("observe", first.Header("X-Rewrite-Mode"));
        Assert.Contains(offTopic, first.Content);
        Assert.Equal("hit-exact", repeat.Cache);
        Assert.Equal(first.Content, repeat.Content);
        Assert.Equal("miss", paraphrase.Cache);
        Assert.Equal(before + 3, await MetricAsync(proxy, $"rewriteproxy_question_unlocated_total{{lane=\"{OwnLane}\"}}"));
    }

    [Fact]
    public async Task A_template_learned_from_three_calls_is_kept_across_a_restart_and_shown_in_admin_stats()
    {
        _upstream.Completion = _ => "How late do night buses run?\nIs there a night fare?";
        var store = TestProxy.NewStorePath();
        await using (var proxy = await StartAsync(store))
        {
            var sources = new List<string?>();
            foreach (var q in PromptShapes.Questions.Take(4))
                sources.Add((await AskAsync(proxy, "siblings", PromptShapes.Unmarked(q), system: "You help a transit operator.")).Header("X-Rewrite-Question"));
            Assert.Equal(["unlocated", "unlocated", "template", "template"], sources);

            var stats = await StatsAsync(proxy);
            var template = Assert.Single(stats["templates"]!.AsArray())!;
            Assert.Equal("siblings", template["lane"]!.GetValue<string>());
            Assert.Equal(PromptShapes.Unmarked("{question}"), template["template"]!.GetValue<string>());
            Assert.Equal(3, template["learnedFrom"]!.GetValue<int>());
            var lane = stats["lanes"]!.AsArray().First(l => l!["lane"]!.GetValue<string>() == "siblings")!;
            Assert.Equal(2, lane["questionsBySource"]!["template"]!.GetValue<long>());
            Assert.Equal(2, lane["questionsBySource"]!["unlocated"]!.GetValue<long>());
        }

        await using var restarted = await StartAsync(store);
        var after = await AskAsync(restarted, "siblings", PromptShapes.Unmarked(PromptShapes.Questions[5]), system: "You help a transit operator.");
        Assert.Equal("template", after.Header("X-Rewrite-Question"));
    }

    [Fact]
    public async Task A_repeat_of_a_message_first_seen_unlocated_still_hits_exactly_once_its_template_is_learned()
    {
        _upstream.Completion = _ => "How late do night buses run?\nIs there a night fare?";
        await using var proxy = await StartAsync();
        var first = PromptShapes.Unmarked(PromptShapes.Questions[0]);

        Assert.Equal("unlocated", (await AskAsync(proxy, "siblings", first)).Header("X-Rewrite-Question"));
        foreach (var q in PromptShapes.Questions.Skip(1).Take(2)) await AskAsync(proxy, "siblings", PromptShapes.Unmarked(q));
        var repeat = await AskAsync(proxy, "siblings", first);

        Assert.Equal("template", repeat.Header("X-Rewrite-Question"));
        Assert.Equal("hit-exact", repeat.Cache);
    }

    [Fact]
    public async Task Bare_questions_are_read_as_before_and_the_siblings_fallback_keeps_the_clients_container()
    {
        const string question = "What happens if I return a bike to a full docking station?";
        _upstream.Completion = _ => "<questions>\nWhat is the boiling point of olive oil?\n</questions>";
        await using var proxy = await StartAsync();

        var reply = await AskAsync(proxy, "siblings", question);

        Assert.Equal("message", reply.Header("X-Rewrite-Question"));
        Assert.Equal($"<questions>\n{question}\n</questions>", reply.Content);
        Assert.Equal("question", reply.Header("X-Rewrite-Fallback"));
        Assert.True(await MetricAsync(proxy, "rewriteproxy_fallback_total{lane=\"siblings\"}") >= 1);
    }
}
