using System.Collections.Concurrent;
using System.Security.Cryptography;
using System.Text;
using System.Text.Json.Nodes;
using System.Text.RegularExpressions;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Logging;
using RewriteProxy.Cache;
using RewriteProxy.Hosting;

using RewriteProxy.Wire;

namespace RewriteProxy.Cli.Demo;

/// <summary>
/// A scripted stand-in for an OpenAI-compatible provider, on 127.0.0.1 with a random port, inside the product: it answers
/// draft calls with a handbook passage and siblings calls with related questions, with the noise real models add
/// (preambles, numbering, echoes, duplicates, off-topic lines, drafts that wander off). Every choice comes from a
/// random generator seeded by (seed, lane, question, attempt), so a run is repeatable whatever order the calls arrive in.
/// </summary>
public sealed class DemoUpstream : IAsyncDisposable
{
    /// <summary>Shortest and longest answer time: a small hosted model's typical range for a short completion (from memory).</summary>
    public static readonly TimeSpan MinDelay = TimeSpan.FromMilliseconds(300);
    public static readonly TimeSpan MaxDelay = TimeSpan.FromMilliseconds(800);

    /// <summary>Share of first drafts for a question that wander off topic, and of retried drafts that wander again.</summary>
    public const double FirstDraftDrift = 0.15;
    public const double RetryDraftDrift = 0.35;

    /// <summary>Chances of each kind of noise in one siblings answer (invented to exercise every drop reason).</summary>
    public const double PreambleChance = 0.3;
    public const double NumberingChance = 0.35;
    public const double EchoChance = 0.25;
    public const double DuplicateChance = 0.25;
    public const double OffTopicChance = 0.35;

    /// <summary>Characters per token, the usual rule of thumb for English text (common practice); for the usage block only.</summary>
    const int CharsPerToken = 4;

    /// <summary>Tokens a chat request costs beyond its text (role markers and the like; from memory).</summary>
    const int ChatOverheadTokens = 8;

    readonly WebApplication _app;
    readonly int _seed;
    readonly Dictionary<string, (ScenarioQuestion Item, NearMiss? Swap)> _script = new(StringComparer.Ordinal);
    readonly ConcurrentDictionary<string, int> _attempts = new(StringComparer.Ordinal);
    readonly ConcurrentDictionary<string, int> _callsByLane = new(StringComparer.Ordinal);

    /// <summary>The base URL a proxy's <c>Upstream:BaseUrl</c> points at (ends in /v1).</summary>
    public Uri BaseUrl { get; }

    /// <summary>Chat completions answered, by lane kind ("draft" or "siblings"); retries included.</summary>
    public IReadOnlyDictionary<string, int> CallsByLane => _callsByLane;

    DemoUpstream(WebApplication app, int seed, Uri baseUrl)
    {
        _app = app;
        _seed = seed;
        BaseUrl = baseUrl;
        foreach (var item in DemoScenario.Questions)
        {
            _script[QuestionText.Normalize(item.Question)] = (item, null);
            foreach (var p in item.Paraphrases) _script[QuestionText.Normalize(p)] = (item, null);
            if (item.NearMiss is { } nm) _script[QuestionText.Normalize(nm.Text)] = (item, nm);
        }
    }

    public static async Task<DemoUpstream> StartAsync(int seed, CancellationToken cancel)
    {
        var builder = WebApplication.CreateSlimBuilder(new WebApplicationOptions { Args = [] });
        builder.Logging.ClearProviders();
        builder.WebHost.UseUrls("http://127.0.0.1:0");
        var app = builder.Build();
        DemoUpstream? self = null;
        app.MapPost("/v1/chat/completions", (HttpContext context) => self!.AnswerAsync(context));
        app.MapFallback((HttpContext context) =>
            ErrorAsync(context, 404, $"The scripted upstream answers only POST /v1/chat/completions, not {context.Request.Path}."));
        await app.StartAsync(cancel);
        self = new DemoUpstream(app, seed, new Uri(ProxyApp.BoundAddress(app), "v1"));
        return self;
    }

    async Task AnswerAsync(HttpContext context)
    {
        JsonNode? request;
        try
        {
            request = await JsonNode.ParseAsync(context.Request.Body, cancellationToken: context.RequestAborted);
        }
        catch (System.Text.Json.JsonException)
        {
            await ErrorAsync(context, 400, "The request body is not JSON.");
            return;
        }
        var messages = request?["messages"] as JsonArray;
        var system = Text(messages, "system", first: true);
        var question = Text(messages, "user", first: false);
        if (question is null)
        {
            await ErrorAsync(context, 400, "The request has no user message.");
            return;
        }
        var lane = system == DemoScenario.SiblingsSystemPrompt ? "siblings" : "draft";
        _callsByLane.AddOrUpdate(lane, 1, (_, n) => n + 1);
        var normalized = QuestionText.Normalize(question);
        var attempt = _attempts.AddOrUpdate(lane + "\n" + normalized, 1, (_, n) => n + 1);
        var random = new Random(CallSeed(lane, normalized, attempt));

        var content = lane == "siblings" ? Siblings(question, normalized, random) : Draft(question, normalized, attempt, random);
        var delay = MinDelay + (MaxDelay - MinDelay) * random.NextDouble();
        await Task.Delay(delay, context.RequestAborted);

        var promptTokens = ((system?.Length ?? 0) + question.Length) / CharsPerToken + ChatOverheadTokens;
        var completionTokens = Math.Max(1, content.Length / CharsPerToken);
        var model = request?["model"]?.GetValue<string>() ?? "scripted-model";
        // The product's own completion shape, so the stand-in answers exactly as a cache hit would look.
        await context.Response.WriteAsJsonAsync(CompletionWriter.FromEntry(model, content, promptTokens, completionTokens),
            context.RequestAborted);
    }

    string Draft(string question, string normalized, int attempt, Random random)
    {
        var drifts = random.NextDouble() < (attempt == 1 ? FirstDraftDrift : RetryDraftDrift);
        if (drifts || !_script.TryGetValue(normalized, out var known))
            return drifts ? DemoScenario.OffTopicDrafts[random.Next(DemoScenario.OffTopicDrafts.Length)] : Generic(question);
        return Swap(known.Item.Draft, known.Swap);
    }

    string Siblings(string question, string normalized, Random random)
    {
        if (!_script.TryGetValue(normalized, out var known)) return Generic(question);
        var lines = known.Item.Siblings.Select(s => Swap(s, known.Swap)).ToList();
        if (random.NextDouble() < DuplicateChance)
        {
            var twin = random.Next(lines.Count);
            lines.Insert(twin + 1, lines[twin]);
        }
        if (random.NextDouble() < EchoChance)
            // Models often restate the question first, in lower case or without its question mark.
            lines.Insert(0, random.Next(2) == 0 ? question.ToLowerInvariant() : question.TrimEnd('?'));
        if (random.NextDouble() < OffTopicChance)
            lines.Insert(random.Next(lines.Count + 1), DemoScenario.OffTopicSiblings[random.Next(DemoScenario.OffTopicSiblings.Length)]);
        if (random.NextDouble() < NumberingChance)
            lines = lines.Select((l, i) => $"{i + 1}. {l}").ToList();
        if (random.NextDouble() < PreambleChance)
            lines.Insert(0, DemoScenario.Preambles[random.Next(DemoScenario.Preambles.Length)]);
        return string.Join("\n", lines);
    }

    static string Generic(string question) =>
        $"The staff handbook of Fenwick Valley Libraries covers this question: {question}";

    /// <summary>The answer for a near-miss carries its changed detail, whole words only ("paid" in "unpaid" stays).</summary>
    static string Swap(string text, NearMiss? swap) =>
        swap is null ? text : Regex.Replace(text, $@"(?<![\w-]){Regex.Escape(swap.From)}(?![\w-])", swap.To);

    int CallSeed(string lane, string normalized, int attempt)
    {
        var hash = SHA256.HashData(Encoding.UTF8.GetBytes($"{_seed}\n{lane}\n{normalized}\n{attempt}"));
        return BitConverter.ToInt32(hash, 0);
    }

    static string? Text(JsonArray? messages, string role, bool first)
    {
        if (messages is null) return null;
        var matching = messages.Where(m => m?["role"]?.GetValue<string>() == role).ToList();
        if (matching.Count == 0) return null;
        return (first ? matching[0] : matching[^1])?["content"] is JsonValue v && v.TryGetValue<string>(out var s) ? s : null;
    }

    static Task ErrorAsync(HttpContext context, int status, string message)
    {
        context.Response.StatusCode = status;
        return context.Response.WriteAsJsonAsync(new JsonObject
        {
            ["error"] = new JsonObject { ["message"] = message, ["type"] = "invalid_request_error", ["code"] = null },
        });
    }

    public async ValueTask DisposeAsync()
    {
        await _app.StopAsync();
        await _app.DisposeAsync();
    }
}
