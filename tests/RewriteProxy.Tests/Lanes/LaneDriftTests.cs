using System.Numerics.Tensors;
using RewriteProxy.Tests.Fixtures;
using RewriteProxy.Tests.Guard;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// The drift guard on the wire: what the app receives from siblings and draft lanes, in enforce and observe mode.
/// The oracle for "on topic" is an independent cosine (System.Numerics.Tensors.TensorPrimitives.CosineSimilarity)
/// over the model's vectors, and the labels of Guard/Data/drift-labels.jsonl.
/// </summary>
public sealed class LaneDriftTests : UpstreamAndProxy
{
    protected override bool StartsProxy => false;

    static readonly DriftLabel Label = DriftLabel.Load().First(l => l.Question == "What happens if I return a bike to a full docking station?");

    static double Drift(string question, string rewrite)
    {
        var v = Fixtures.SharedEmbedder.Instance.Embed([question, rewrite]);
        return 1 - TensorPrimitives.CosineSimilarity(v[0], v[1]);
    }

    /// <summary>A messy completion: a preamble, numbering, on-topic and off-topic lines, an echo and a duplicate.</summary>
    static string MessySiblings() =>
        "Here are some related questions:\r\n" +
        string.Join("\r\n", Label.SiblingsOn.Select((s, i) => $"{i + 1}. {s}")) + "\r\n" +
        string.Join("\n", Label.SiblingsOff.Select(s => "- " + s)) + "\n" +
        "* " + Label.Question + "\n" +
        "\"" + Label.SiblingsOn[0] + "\"\n\nI hope these help!";

    Task<TestProxy> StartAsync(params (string, string)[] settings)
    {
        var all = new Dictionary<string, string?>();
        foreach (var (k, v) in settings) all[k] = v;
        return StartProxyAsync(all);
    }

    [Fact]
    public async Task Siblings_lane_drops_off_topic_echo_and_duplicate_lines_and_keeps_on_topic_ones()
    {
        Upstream.Completion = _ => MessySiblings();
        await using var proxy = await StartAsync(("Lanes:siblings:MaxSiblings", "10"));
        var maxDrift = proxy.Options.Lanes["siblings"].MaxDrift;

        var reply = await proxy.AskAsync("siblings", Label.Question);
        var lines = reply.Content.Split('\n');

        Assert.Equal(200, reply.Status);
        var expectedKept = Label.SiblingsOn.Where(s => Drift(Label.Question, s) <= maxDrift).ToHashSet();
        Assert.Equal(expectedKept, lines.ToHashSet());
        Assert.DoesNotContain(Label.Question, lines);
        Assert.Equal(lines.Length, lines.Distinct().Count());
        foreach (var off in Label.SiblingsOff.Where(s => Drift(Label.Question, s) > maxDrift)) Assert.DoesNotContain(off, lines);
        var dropped = int.Parse(reply.Header("X-Rewrite-Dropped")!);
        Assert.Equal(Label.SiblingsOn.Length + Label.SiblingsOff.Length + 2 - lines.Length, dropped);
        var reportedDrift = double.Parse(reply.Header("X-Rewrite-Drift")!, System.Globalization.CultureInfo.InvariantCulture);
        Assert.Equal(lines.Max(l => Drift(Label.Question, l)), reportedDrift, 3);
    }

    [Fact]
    public async Task A_later_hit_returns_exactly_the_accepted_content_and_headers_in_json_and_stream()
    {
        Upstream.Completion = _ => MessySiblings();
        await using var proxy = await StartAsync();

        var miss = await proxy.AskAsync("siblings", Label.Question);
        var hit = await proxy.AskAsync("siblings", Label.Question);
        var streamed = await proxy.AskAsync("siblings", Label.Question, stream: true);

        Assert.Equal("miss", miss.Cache);
        Assert.Equal("hit-exact", hit.Cache);
        Assert.Equal("hit-exact", streamed.Cache);
        Assert.Equal(miss.Content, hit.Content);
        Assert.Equal(miss.Content, streamed.Content);
        Assert.Equal(miss.Header("X-Rewrite-Drift"), hit.Header("X-Rewrite-Drift"));
        Assert.Equal(miss.Header("X-Rewrite-Dropped"), hit.Header("X-Rewrite-Dropped"));
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task A_streamed_miss_carries_the_filtered_content()
    {
        Upstream.Completion = _ => MessySiblings();
        await using var proxy = await StartAsync();
        var streamed = await proxy.AskAsync("siblings", Label.Question, stream: true);
        var json = await proxy.AskAsync("siblings", Label.Question);

        Assert.Equal("text/event-stream", streamed.Response.Content.Headers.ContentType!.MediaType);
        Assert.Equal(json.Content, streamed.Content);
        Assert.DoesNotContain("Here are some", streamed.Content);
    }

    [Fact]
    public async Task Max_siblings_keeps_the_closest_first_and_counts_the_rest_as_surplus()
    {
        Upstream.Completion = _ => MessySiblings();
        await using var proxy = await StartAsync(("Lanes:siblings:MaxSiblings", "2"));
        var maxDrift = proxy.Options.Lanes["siblings"].MaxDrift;

        var lines = (await proxy.AskAsync("siblings", Label.Question)).Content.Split('\n');

        Assert.Equal(2, lines.Length);
        // MMR's first pick is the candidate most similar to the question (Carbonell & Goldstein 1998).
        var closest = Label.SiblingsOn.Concat(Label.SiblingsOff).Where(s => Drift(Label.Question, s) <= maxDrift)
            .MinBy(s => Drift(Label.Question, s));
        Assert.Equal(closest, lines[0]);
    }

    [Fact]
    public async Task Observe_mode_reports_drift_but_returns_the_completion_unchanged()
    {
        Upstream.Completion = _ => MessySiblings();
        await using var proxy = await StartAsync(("Lanes:siblings:Mode", "observe"));

        var reply = await proxy.AskAsync("siblings", Label.Question);

        Assert.Equal(MessySiblings(), reply.Content);
        Assert.Equal("observe", reply.Header("X-Rewrite-Mode"));
        Assert.True(int.Parse(reply.Header("X-Rewrite-Dropped")!) >= 3);
    }

    [Fact]
    public async Task All_siblings_dropped_gives_an_empty_valid_answer_that_is_not_cached()
    {
        Upstream.Completion = _ => string.Join("\n", Label.SiblingsOff.Where(s => Drift(Label.Question, s) > 0.65));
        await using var proxy = await StartAsync();

        var first = await proxy.AskAsync("siblings", Label.Question);
        var second = await proxy.AskAsync("siblings", Label.Question);

        Assert.Equal(200, first.Status);
        Assert.Equal("", first.Content);
        Assert.Equal("miss", second.Cache);
    }

    string OnDraft => Label.DraftsOn.First(d => Drift(Label.Question, d) <= 0.5);
    string OffDraft => Label.DraftsOff.First(d => Drift(Label.Question, d) > 0.5);

    [Fact]
    public async Task An_on_topic_draft_is_kept_and_cached_with_its_drift()
    {
        Upstream.Completion = _ => OnDraft;
        await using var proxy = await StartAsync();

        var miss = await proxy.AskAsync("draft", Label.Question);
        var hit = await proxy.AskAsync("draft", Label.Question);

        Assert.Equal(OnDraft, miss.Content);
        Assert.Equal("0", miss.Header("X-Rewrite-Dropped"));
        Assert.Equal(Drift(Label.Question, OnDraft), double.Parse(miss.Header("X-Rewrite-Drift")!, System.Globalization.CultureInfo.InvariantCulture), 3);
        Assert.Equal(miss.Header("X-Rewrite-Drift"), hit.Header("X-Rewrite-Drift"));
        Assert.Equal(OnDraft, hit.Content);
    }

    [Fact]
    public async Task Retry_asks_again_and_keeps_the_first_draft_that_passes()
    {
        var calls = 0;
        Upstream.Completion = _ => Interlocked.Increment(ref calls) == 1 ? OffDraft : OnDraft;
        await using var proxy = await StartAsync(("Lanes:draft:OnDrift", "retry"), ("Lanes:draft:Retries", "2"));

        var reply = await proxy.AskAsync("draft", Label.Question);

        Assert.Equal(OnDraft, reply.Content);
        Assert.Equal(2, Upstream.ChatCalls);
        Assert.Equal("1", reply.Header("X-Rewrite-Dropped"));
    }

    [Fact]
    public async Task Retry_gives_up_after_its_retries_and_falls_back_to_the_question()
    {
        Upstream.Completion = _ => OffDraft;
        await using var proxy = await StartAsync(("Lanes:draft:OnDrift", "retry"), ("Lanes:draft:Retries", "1"));

        var reply = await proxy.AskAsync("draft", Label.Question);

        Assert.Equal(2, Upstream.ChatCalls);
        Assert.Equal(Label.Question, reply.Content);
        Assert.Equal("question", reply.Header("X-Rewrite-Fallback"));
    }

    [Fact]
    public async Task Fallback_answers_with_the_question_and_caches_nothing()
    {
        Upstream.Completion = _ => OffDraft;
        await using var proxy = await StartAsync(("Lanes:draft:OnDrift", "fallback"));

        var first = await proxy.AskAsync("draft", Label.Question, stream: true);
        var second = await proxy.AskAsync("draft", Label.Question);

        Assert.Equal(Label.Question, first.Content);
        Assert.Equal("miss", second.Cache);
        Assert.Equal(2, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Reject_is_422_naming_the_drift_and_the_threshold()
    {
        Upstream.Completion = _ => OffDraft;
        await using var proxy = await StartAsync(("Lanes:draft:OnDrift", "reject"));

        var reply = await proxy.AskAsync("draft", Label.Question);

        Assert.Equal(422, reply.Status);
        var error = await OpenAiError.ReadAsync(reply.Response);
        Assert.Equal("draft_drift", error.Code);
        Assert.Contains("Lanes:draft:MaxDrift = 0.5", error.Message);
        Assert.Contains(Drift(Label.Question, OffDraft).ToString("0.000", System.Globalization.CultureInfo.InvariantCulture)[..4], error.Message);
    }

    [Fact]
    public async Task Observe_mode_keeps_a_drifted_draft_and_says_it_would_drop_it()
    {
        Upstream.Completion = _ => OffDraft;
        await using var proxy = await StartAsync(("Lanes:draft:Mode", "observe"), ("Lanes:draft:OnDrift", "reject"));

        var reply = await proxy.AskAsync("draft", Label.Question);

        Assert.Equal(200, reply.Status);
        Assert.Equal(OffDraft, reply.Content);
        Assert.Equal("observe", reply.Header("X-Rewrite-Mode"));
        Assert.Equal("1", reply.Header("X-Rewrite-Dropped"));
    }
}
