using System.Globalization;
using System.Numerics.Tensors;
using System.Text.Json.Nodes;
using RewriteProxy.Embedding;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Telemetry;

/// <summary>
/// prometheus-net metrics live in one process-wide registry. The classes that compare scraped values with a
/// workload's counts run alone (xunit runs non-parallel collections after the parallel ones), so that the
/// unlabelled and reason-only series (embed duration, fail-open) move only by what the workload did.
/// </summary>
[CollectionDefinition(Name, DisableParallelization = true)]
public sealed class MetricsCollection
{
    public const string Name = "process-wide metrics";
}

/// <summary>What one lane of the workload should have counted, tallied from the requests sent and the headers received.</summary>
public sealed class LaneTally(string lane)
{
    public string Lane { get; } = lane;

    /// <summary>By the metric's result label: hit_exact, hit_semantic, miss, bypass.</summary>
    public Dictionary<string, int> Lookups { get; } = new() { ["hit_exact"] = 0, ["hit_semantic"] = 0, ["miss"] = 0, ["bypass"] = 0 };

    /// <summary>X-Rewrite-Similarity of every semantic hit.</summary>
    public List<double> Similarities { get; } = [];

    /// <summary>Anchor-guard refusals by reason, as the near-miss questions were designed (checked against the model).</summary>
    public Dictionary<string, int> GuardRefusals { get; } = [];

    /// <summary>Rewrites the drift guard judged: kept lines / accepted drafts, and those dropped (X-Rewrite-Dropped).</summary>
    public int Accepted { get; set; }
    public int Dropped { get; set; }

    /// <summary>Drops by reason, as the upstream script was designed (off-topic lines and drafts: drift).</summary>
    public Dictionary<string, int> DroppedByReason { get; } = [];

    /// <summary>Upstream calls the lane made for misses (bypasses go through the passthrough, which is not timed per lane).</summary>
    public int UpstreamCalls { get; set; }

    public int Entries { get; set; }
    public long TokensSaved { get; set; }
    public int Coalesced { get; set; }

    /// <summary>Hits over lookups the cache was allowed to answer (bypass left out, as in recording.rules.yml).</summary>
    public double HitRatio
    {
        get
        {
            var hits = Lookups["hit_exact"] + Lookups["hit_semantic"];
            return (double)hits / (hits + Lookups["miss"]);
        }
    }

    /// <summary>Dropped over judged rewrites.</summary>
    public double DropRatio => (double)Dropped / (Accepted + Dropped);

    public int Judged => Accepted + Dropped;
}

/// <summary>Every count the workload should have left in /metrics.</summary>
public sealed record WorkloadTally(LaneTally Draft, LaneTally Siblings, IReadOnlyList<string> QuestionsSent)
{
    public IEnumerable<LaneTally> Lanes => [Draft, Siblings];
}

/// <summary>
/// A scripted mix of lane calls through the real proxy, against a <see cref="ScriptedUpstream"/>: misses, repeats
/// (exact hits), paraphrases (semantic hits), near-miss questions the anchor guard must refuse (another year, a
/// negation), siblings completions with on-topic and off-topic lines, a draft that drifts once and is retried, a
/// burst of identical concurrent questions (coalesced) and a request with tools (bypass). Scenario: the ferry
/// service of a fictional island, Marrow Island. Expected counts are tallied from what was sent and the
/// X-Rewrite-* headers that came back, never from /metrics.
/// </summary>
public sealed class MetricsWorkload
{
    /// <summary>A model name no metric may carry; distinctive, so that a leak into a label would be found by grep.</summary>
    public const string Model = "marrow-ferry-model-7";

    /// <summary>Credentials of the two tenants; neither they nor their partition hashes may appear in a scrape.</summary>
    public static readonly string[] Credentials = ["sk-marrow-tenant-harbourmaster-41", "sk-marrow-tenant-ticketdesk-97"];

    /// <summary>Callers fired at once with one new question; the first calls upstream, the others join it.</summary>
    const int BurstCallers = 3;

    /// <summary>Upstream delay during the burst: long enough that every caller arrives while the first call is in flight.</summary>
    static readonly TimeSpan BurstDelay = TimeSpan.FromMilliseconds(600);

    // Drafts: answers that restate the question stay well inside MaxDrift; the off-topic one is far outside it.
    static string OnTopicDraft(string question) =>
        "Draft answer: " + question.TrimEnd('?') + ". The Marrow Island ferry office lists this on its timetable and fares page.";

    const string OffTopicDraft = "Chocolate cake needs butter, sugar, eggs and cocoa; bake it for forty minutes.";

    const string DraftDaysQuestion = "On which days does the Marrow Island ferry run in winter?";

    static readonly Dictionary<string, string[]> SiblingLines = new()
    {
        ["Where can I park my car near the Marrow Island ferry terminal?"] =
        [
            "Is there long-stay parking at the Marrow Island ferry terminal?",
            "How much does a day of parking at the ferry terminal cost?",
            "Are there electric car chargers in the ferry terminal car park?",
            "What is the best recipe for a chocolate birthday cake?",
        ],
        ["Are dogs allowed on the Marrow Island ferry?"] =
        [
            "Do dogs need their own ticket on the Marrow Island ferry?",
            "Must dogs be kept on a lead on the ferry deck?",
            "Who won the football world cup in 1998?",
            "How do I replace the chain of a mountain bike?",
        ],
        ["Are dogs not allowed on the Marrow Island ferry?"] =
        [
            "Which animals are banned from the Marrow Island ferry?",
            "Can assistance dogs travel on the ferry?",
            "What is the capital city of Australia?",
        ],
    };

    /// <summary>Lines of <see cref="SiblingLines"/> that are off topic by design: they must be dropped for drift.</summary>
    static readonly HashSet<string> OffTopicLines =
    [
        "What is the best recipe for a chocolate birthday cake?",
        "Who won the football world cup in 1998?",
        "How do I replace the chain of a mountain bike?",
        "What is the capital city of Australia?",
    ];

    readonly TestProxy _proxy;
    readonly ScriptedUpstream _upstream;
    readonly IEmbedder _reference;
    readonly WorkloadTally _tally;
    readonly Dictionary<string, int> _draftAttempts = [];
    readonly List<string> _sent = [];

    // Per lane: the questions stored as entries, and the tokens (prompt + completion) of the answer each was stored from.
    readonly Dictionary<string, Dictionary<string, long>> _stored = [];

    MetricsWorkload(TestProxy proxy, ScriptedUpstream upstream, IEmbedder reference, string draftLane, string siblingsLane)
    {
        _proxy = proxy;
        _upstream = upstream;
        _reference = reference;
        _tally = new WorkloadTally(new LaneTally(draftLane), new LaneTally(siblingsLane), _sent);
        _stored[draftLane] = [];
        _stored[siblingsLane] = [];
        upstream.Completion = Answer;
    }

    /// <summary>Settings for a proxy that serves the workload's two lanes (names unique to the calling test class).</summary>
    public static Dictionary<string, string?> LaneSettings(string draftLane, string siblingsLane) => new()
    {
        [$"Lanes:{draftLane}:Kind"] = "draft",
        [$"Lanes:{draftLane}:MaxDrift"] = DraftMaxDrift.ToString(CultureInfo.InvariantCulture),
        [$"Lanes:{draftLane}:OnDrift"] = "retry",
        [$"Lanes:{draftLane}:Retries"] = "1",
        [$"Lanes:{siblingsLane}:Kind"] = "siblings",
        [$"Lanes:{siblingsLane}:MaxDrift"] = SiblingsMaxDrift.ToString(CultureInfo.InvariantCulture),
        // Above the default floor, so that each near-miss of the workload is the one candidate of its lookup and counts one refusal.
        [$"Lanes:{draftLane}:HitSimilarity"] = WorkloadHitSimilarity.ToString(CultureInfo.InvariantCulture),
        [$"Lanes:{siblingsLane}:HitSimilarity"] = WorkloadHitSimilarity.ToString(CultureInfo.InvariantCulture),
    };

    public const double WorkloadHitSimilarity = 0.85;

    /// <summary>The project's measured defaults (docs/measurements/drift-defaults.md), set explicitly so the gauge's expected value is known here.</summary>
    public const double DraftMaxDrift = 0.50;
    public const double SiblingsMaxDrift = 0.65;

    /// <summary>Runs the whole mix and returns what it should have counted.</summary>
    /// <param name="reference">the same sentence model the proxy uses, to check that near misses really are near.</param>
    public static async Task<WorkloadTally> RunAsync(TestProxy proxy, ScriptedUpstream upstream, IEmbedder reference,
        string draftLane, string siblingsLane)
    {
        var run = new MetricsWorkload(proxy, upstream, reference, draftLane, siblingsLane);
        await run.RunAsync();
        return run._tally;
    }

    async Task RunAsync()
    {
        var draft = _tally.Draft;
        var siblings = _tally.Siblings;
        var tenant = Credentials[0];

        // Misses that become entries.
        await MissAsync(draft, "What time does the first ferry leave Marrow Island harbour?", tenant);
        await MissAsync(draft, "How much is a return ticket from the mainland to Marrow Island?", tenant);
        await MissAsync(draft, "Which ferry timetable applied on Marrow Island in 2023?", tenant);
        await MissAsync(draft, "Is the Marrow Island ferry wheelchair accessible?", tenant);
        // The first draft for this question is off topic: dropped for drift, retried once, the second kept.
        await MissAsync(draft, DraftDaysQuestion, tenant);

        // Repeats: exact hits (the normalised text is equal; case and spacing do not matter).
        await HitAsync(draft, "What time does the first ferry leave Marrow Island harbour?", "hit-exact",
            source: "What time does the first ferry leave Marrow Island harbour?", tenant);
        await HitAsync(draft, "how much is a return ticket from the mainland to  Marrow Island", "hit-exact",
            source: "How much is a return ticket from the mainland to Marrow Island?", tenant);

        // Paraphrases: semantic hits.
        await HitAsync(draft, "At what time does the first ferry depart from Marrow Island harbour?", "hit-semantic",
            source: "What time does the first ferry leave Marrow Island harbour?", tenant);
        await HitAsync(draft, "Is the ferry to Marrow Island accessible for wheelchairs?", "hit-semantic",
            source: "Is the Marrow Island ferry wheelchair accessible?", tenant);

        // Near misses: similar enough to hit, but an anchor differs, so the guard refuses and the call is a miss.
        await NearMissAsync(draft, "Which ferry timetable applied on Marrow Island in 2024?",
            near: "Which ferry timetable applied on Marrow Island in 2023?", reason: "number", tenant);
        await NearMissAsync(draft, "Is the Marrow Island ferry not wheelchair accessible?",
            near: "Is the Marrow Island ferry wheelchair accessible?", reason: "negation", tenant);

        // Concurrent identical new questions: one upstream call, the other callers coalesced onto it.
        await BurstAsync(draft, "How early should I arrive before the Marrow Island ferry departs?", tenant);

        // A request with tools: the cache cannot stand in for it.
        await BypassAsync(draft, "Book me a seat on the next Marrow Island ferry.", tenant);

        // Siblings: misses with off-topic lines dropped, a repeat, a paraphrase, a negated near miss.
        await MissAsync(siblings, "Where can I park my car near the Marrow Island ferry terminal?", tenant);
        await MissAsync(siblings, "Are dogs allowed on the Marrow Island ferry?", Credentials[1]);
        await HitAsync(siblings, "Where can I park my car near the Marrow Island ferry terminal?", "hit-exact",
            source: "Where can I park my car near the Marrow Island ferry terminal?", tenant);
        await HitAsync(siblings, "Are dogs permitted on the Marrow Island ferry?", "hit-semantic",
            source: "Are dogs allowed on the Marrow Island ferry?", Credentials[1]);
        await NearMissAsync(siblings, "Are dogs not allowed on the Marrow Island ferry?",
            near: "Are dogs allowed on the Marrow Island ferry?", reason: "negation", Credentials[1]);
    }

    string Answer(JsonNode request)
    {
        var question = ScriptedUpstream.LastUserText(request);
        if (SiblingLines.TryGetValue(question, out var lines)) return string.Join("\n", lines);
        if (question == DraftDaysQuestion)
        {
            lock (_draftAttempts)
            {
                var attempt = _draftAttempts[question] = _draftAttempts.GetValueOrDefault(question) + 1;
                if (attempt == 1) return OffTopicDraft;
            }
        }
        return OnTopicDraft(question);
    }

    static long TokensOf(string content) =>
        ScriptedUpstream.Completed(Model, content)["usage"]!["total_tokens"]!.GetValue<int>();

    async Task<LaneReply> AskAsync(LaneTally lane, string question, string credential)
    {
        _sent.Add(question);
        var reply = await _proxy.Client.PostLaneAsync(lane.Lane, LaneCalls.Request(question, model: Model), credential);
        Assert.True(reply.Status == 200, $"{lane.Lane} '{question}': {reply.Status} {reply.Body}");
        return reply;
    }

    static int DroppedHeader(LaneReply reply) => int.Parse(reply.Header("X-Rewrite-Dropped") ?? "0", CultureInfo.InvariantCulture);

    void CountLookup(LaneTally lane, LaneReply reply) => lane.Lookups[reply.Cache.Replace('-', '_')]++;

    async Task MissAsync(LaneTally lane, string question, string credential)
    {
        var reply = await AskAsync(lane, question, credential);
        Assert.True(reply.Cache == "miss", $"{lane.Lane} '{question}' should be a miss, was {reply.Cache}");
        CountMiss(lane, question, reply, callers: 1, judgements: 1);
    }

    /// <summary><paramref name="judgements"/> upstream answers (each with its retries) shared by <paramref name="callers"/> callers.</summary>
    void CountMiss(LaneTally lane, string question, LaneReply reply, int callers, int judgements)
    {
        lane.Lookups["miss"] += callers;
        var dropped = DroppedHeader(reply) * judgements;
        lane.Dropped += dropped;
        lane.DroppedByReason["drift"] = lane.DroppedByReason.GetValueOrDefault("drift") + dropped;
        if (SiblingLines.TryGetValue(question, out var lines))
        {
            // The scenario's own labels: every off-topic line, and only those, is dropped.
            Assert.Equal(lines.Count(OffTopicLines.Contains) * judgements, dropped);
            var kept = reply.Content.Split('\n', StringSplitOptions.RemoveEmptyEntries);
            Assert.Equal(lines.Where(l => !OffTopicLines.Contains(l)).Order(), kept.Order());
            lane.Accepted += kept.Length * judgements;
            lane.UpstreamCalls += judgements;
            _stored[lane.Lane][question] = TokensOf(string.Join("\n", lines));
        }
        else
        {
            // A draft: each dropped attempt cost one more upstream call; the last attempt was accepted.
            Assert.Equal(question == DraftDaysQuestion ? 1 : 0, dropped);
            Assert.Equal(OnTopicDraft(question), reply.Content);
            lane.Accepted += judgements;
            lane.UpstreamCalls += judgements + dropped;
            _stored[lane.Lane][question] = TokensOf(OnTopicDraft(question));
        }
        lane.Entries = _stored[lane.Lane].Count;
    }

    async Task HitAsync(LaneTally lane, string question, string expected, string source, string credential)
    {
        var reply = await AskAsync(lane, question, credential);
        Assert.True(reply.Cache == expected, $"{lane.Lane} '{question}' should be {expected} of '{source}', was {reply.Cache}");
        CountLookup(lane, reply);
        lane.TokensSaved += _stored[lane.Lane][source];
        if (expected == "hit-semantic")
            lane.Similarities.Add(double.Parse(reply.Header("X-Rewrite-Similarity")!, CultureInfo.InvariantCulture));
    }

    async Task NearMissAsync(LaneTally lane, string question, string near, string reason, string credential)
    {
        // The guard only sees candidates above HitSimilarity: check with the model that this pair is one, and the only one.
        var threshold = _proxy.Options.Lanes[lane.Lane].HitSimilarity;
        var asked = _reference.Embed(question);
        foreach (var stored in _stored[lane.Lane].Keys)
        {
            var similarity = TensorPrimitives.CosineSimilarity(asked, _reference.Embed(stored));
            if (stored == near)
                Assert.True(similarity >= threshold, $"'{question}' vs '{near}': similarity {similarity} below {threshold}; not a near miss");
            else
                Assert.True(similarity < threshold, $"'{question}' vs '{stored}': similarity {similarity}; a second candidate");
        }
        await MissAsync(lane, question, credential);
        lane.GuardRefusals[reason] = lane.GuardRefusals.GetValueOrDefault(reason) + 1;
    }

    async Task BurstAsync(LaneTally lane, string question, string credential)
    {
        var before = _upstream.Requests.Count(r => IsFor(r, question));
        _upstream.Delay = BurstDelay;
        LaneReply[] replies;
        try
        {
            replies = await Task.WhenAll(Enumerable.Range(0, BurstCallers).Select(_ => AskAsync(lane, question, credential)));
        }
        finally
        {
            _upstream.Delay = TimeSpan.Zero;
        }
        Assert.All(replies, r => Assert.Equal("miss", r.Cache));
        var calls = _upstream.Requests.Count(r => IsFor(r, question)) - before;
        Assert.InRange(calls, 1, BurstCallers);
        CountMiss(lane, question, replies[0], callers: BurstCallers, judgements: calls);
        // Callers that did not cause an upstream call were answered from another's.
        lane.Coalesced += BurstCallers - calls;
    }

    static bool IsFor(RecordedRequest request, string question) =>
        request.Path.EndsWith("/chat/completions", StringComparison.Ordinal) && ScriptedUpstream.LastUserText(request.Json!) == question;

    async Task BypassAsync(LaneTally lane, string question, string credential)
    {
        var body = LaneCalls.Request(question, model: Model);
        body["tools"] = new JsonArray(new JsonObject
        {
            ["type"] = "function",
            ["function"] = new JsonObject { ["name"] = "book_seat", ["parameters"] = new JsonObject { ["type"] = "object" } },
        });
        _sent.Add(question);
        var reply = await _proxy.Client.PostLaneAsync(lane.Lane, body, credential);
        Assert.Equal("bypass", reply.Cache);
        CountLookup(lane, reply);
    }
}
