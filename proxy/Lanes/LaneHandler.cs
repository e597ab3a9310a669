using System.Globalization;
using System.Text.Json;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Hosting;
using Microsoft.Extensions.Logging;
using RewriteProxy.Cache;
using RewriteProxy.Forwarding;
using RewriteProxy.Guard;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// One lane call: read the chat request, find the question and its scope, look up exact then semantic, and on a miss
/// make one (coalesced) upstream call, guard its rewrite, store what was accepted and answer in JSON or SSE.
/// Any failure of the cache side forwards the call to the upstream untouched.
/// </summary>
public sealed class LaneHandler(
    RewriteProxyOptions options,
    SemanticCache cache,
    LaneUpstream upstream,
    Passthrough passthrough,
    FailOpenLog failOpen,
    LaneTally tally,
    IHostApplicationLifetime lifetime,
    ILogger<LaneHandler> log)
{
    /// <summary>
    /// Longest a miss's response waits for its entry to be committed. Waiting is what makes an answered miss survive a
    /// crash; the bound keeps a slow disk from holding answers back (the entry still lands, later).
    /// </summary>
    static readonly TimeSpan CommitWait = TimeSpan.FromSeconds(1);

    readonly Coalescer<MissOutcome> _coalescer = new();

    public static class Header
    {
        public const string Cache = "X-Rewrite-Cache";
        public const string Similarity = "X-Rewrite-Similarity";
        public const string Drift = "X-Rewrite-Drift";
        public const string Dropped = "X-Rewrite-Dropped";
        public const string SavedTokens = "X-Rewrite-Saved-Tokens";
        public const string Bypass = "X-Rewrite-Bypass";
        public const string Mode = "X-Rewrite-Mode";
        public const string Fallback = "X-Rewrite-Fallback";
        public const string Lane = "X-Rewrite-Lane";
    }

    public async Task HandleAsync(HttpContext context, string laneName)
    {
        if (!options.Lanes.TryGetValue(laneName, out var lane))
        {
            await UnknownLaneAsync(context, options, laneName);
            return;
        }

        var body = await ReadBodyAsync(context);
        if (body is null) return;

        ChatRequest request;
        try
        {
            request = ChatRequest.Parse(body);
        }
        catch (ChatRequestException e)
        {
            await ErrorResponse.WriteAsync(context, 400, e.Message, "invalid_request_error", "invalid_request");
            return;
        }

        var directives = CacheDirectives.Parse(context.Request.Headers.CacheControl);
        var extraction = QuestionExtractor.Extract(request, lane);
        if (extraction.Site is not { } site)
        {
            context.Response.Headers[Header.Bypass] = LabelValue.Of(extraction.BypassReason!.Value);
            await BypassAsync(context, lane, body);
            return;
        }

        var partition = PartitionKey.Of(options.Partition, context.Request.Headers);
        var scope = ScopeKey.Compute(lane, request, site, partition);
        var normalized = QuestionText.Normalize(site.Question);

        float[]? questionVector = null;
        if (!directives.NoCache && !directives.NoStore)
        {
            LookupResult found;
            try
            {
                found = cache.Lookup(lane, scope, site.Question, normalized, partition);
            }
            catch (CacheFailure f)
            {
                failOpen.Record(f.Reason, f.Message);
                await BypassAsync(context, lane, body);
                return;
            }
            if (found.Kind != LookupKind.Miss)
            {
                await WriteHitAsync(context, lane, request, found);
                return;
            }
            questionVector = found.QuestionVector;
        }

        var miss = new Miss(lane, request, site, scope, normalized, partition, context.Request.Headers, Store: !directives.NoStore,
            questionVector);
        MissOutcome outcome;
        var joined = false;
        try
        {
            var work = directives.NoCache || directives.NoStore
                ? RunMissAsync(miss)
                : _coalescer.RunAsync(scope + "\n" + normalized, () => RunMissAsync(miss), out joined);
            // A caller that joined another's call waits no longer than its own call could have taken.
            outcome = await work.WaitAsync(options.Upstream.Timeout + CommitWait, context.RequestAborted);
        }
        catch (TimeoutException)
        {
            outcome = new MissOutcome.Error(504, "upstream_error", "upstream_timeout", "The upstream did not answer within Upstream:Timeout.");
        }
        catch (OperationCanceledException) when (context.RequestAborted.IsCancellationRequested)
        {
            // The client left; a coalesced call goes on for the others and is still stored.
            return;
        }
        if (joined) ProxyMetrics.Coalesced.WithLabels(lane.Name).Inc();
        var result = directives.NoStore ? CacheResult.Bypass : CacheResult.Miss;
        tally.Lookup(lane.Name, result);
        context.Response.Headers[Header.Cache] = directives.NoStore ? "bypass" : "miss";
        await WriteOutcomeAsync(context, request, outcome);
    }

    /// <summary>404 for a lane name that is not configured, naming the ones that are.</summary>
    public static Task UnknownLaneAsync(HttpContext context, RewriteProxyOptions options, string laneName)
    {
        var names = options.Lanes.Count == 0 ? "none" : string.Join(", ", options.Lanes.Keys.Order(StringComparer.Ordinal));
        return ErrorResponse.WriteAsync(context, 404, $"Unknown lane '{laneName}'. Configured lanes: {names}.",
            "invalid_request_error", "unknown_lane");
    }

    /// <summary>Reads the body up to Limits:MaxRequestBytes; writes 413 and returns null above it.</summary>
    async Task<byte[]?> ReadBodyAsync(HttpContext context)
    {
        var max = options.Limits.MaxRequestBytes;
        if (context.Request.ContentLength > max)
        {
            await TooLargeAsync(context, max);
            return null;
        }
        using var buffer = new MemoryStream();
        var chunk = new byte[16 * 1024];
        int read;
        try
        {
            while ((read = await context.Request.Body.ReadAsync(chunk, context.RequestAborted)) > 0)
            {
                if (buffer.Length + read > max)
                {
                    await TooLargeAsync(context, max);
                    return null;
                }
                buffer.Write(chunk, 0, read);
            }
        }
        catch (Exception e) when (e is IOException or Microsoft.AspNetCore.Http.BadHttpRequestException)
        {
            await ErrorResponse.WriteAsync(context, 400, "The request body could not be read.", "invalid_request_error", "bad_request_body");
            return null;
        }
        return buffer.ToArray();
    }

    static Task TooLargeAsync(HttpContext context, long max) => ErrorResponse.WriteAsync(context, 413,
        $"The request body is larger than Limits:MaxRequestBytes ({max} bytes).", "invalid_request_error", "request_too_large");

    /// <summary>Forwards the call untouched, uncached (a bypass, or a fail-open).</summary>
    async Task BypassAsync(HttpContext context, LaneOptions lane, byte[] body)
    {
        tally.Lookup(lane.Name, CacheResult.Bypass);
        context.Response.Headers[Header.Cache] = "bypass";
        context.Request.Headers.Remove(Header.Lane);
        context.Request.Body = new MemoryStream(body, writable: false);
        context.Request.ContentLength = body.Length;
        await passthrough.ForwardAsync(context, "/chat/completions");
    }

    async Task WriteHitAsync(HttpContext context, LaneOptions lane, ChatRequest request, LookupResult found)
    {
        var entry = found.Entry!;
        var scores = entry.Scores;
        var semantic = found.Kind == LookupKind.HitSemantic;
        tally.Lookup(lane.Name, semantic ? CacheResult.HitSemantic : CacheResult.HitExact);
        var saved = entry.PromptTokens + entry.CompletionTokens;
        tally.Saved(lane.Name, saved);
        if (semantic) ProxyMetrics.HitSimilarity.WithLabels(lane.Name).Observe(found.Similarity!.Value);
        cache.Store.RecordHit(entry.Id, DateTimeOffset.UtcNow);

        var headers = context.Response.Headers;
        headers[Header.Cache] = semantic ? "hit-semantic" : "hit-exact";
        if (semantic) headers[Header.Similarity] = Format(found.Similarity!.Value);
        if (scores.MaxDrift is { } drift) headers[Header.Drift] = Format(drift);
        headers[Header.Dropped] = scores.Dropped.ToString(CultureInfo.InvariantCulture);
        headers[Header.SavedTokens] = saved.ToString(CultureInfo.InvariantCulture);
        var completion = CompletionWriter.FromEntry(entry.ResponseModel ?? request.Model, entry.Content,
            (int)entry.PromptTokens, (int)entry.CompletionTokens);
        await CompletionWriter.WriteAsync(context, completion, request.Stream, request.IncludeUsage);
    }

    static string Format(double value) => value.ToString("0.0000", CultureInfo.InvariantCulture);

    // QuestionVector: the question's vector when the lookup already embedded it; null when the lookup was skipped.
    sealed record Miss(LaneOptions Lane, ChatRequest Request, QuestionSite Site, string Scope, string Normalized, string Partition,
        IHeaderDictionary Headers, bool Store, float[]? QuestionVector);

    /// <summary>
    /// Vectors of the question and of the rewrites, in one model run: the question's own vector is reused when the
    /// lookup already computed it, so a miss never embeds its question twice.
    /// </summary>
    (float[] Question, float[][] Rewrites) EmbedJudged(Miss miss, IReadOnlyList<string> rewrites)
    {
        if (miss.QuestionVector is { } question)
            return (question, rewrites.Count == 0 ? [] : cache.Embed(rewrites));
        var vectors = cache.Embed([miss.Site.Question, .. rewrites]);
        return (vectors[0], vectors[1..]);
    }

    async Task<MissOutcome> RunMissAsync(Miss miss)
    {
        var lane = miss.Lane;
        var body = miss.Request.UpstreamBody();
        var dropped = 0;
        for (var attempt = 1; ; attempt++)
        {
            var answer = await upstream.CallAsync(miss.Headers, body, lane.Name, lifetime.ApplicationStopping);
            if (answer.Failure is not null)
            {
                var code = answer.Status == 504 ? "upstream_timeout" : "upstream_unreachable";
                var message = answer.Status == 504 ? "The upstream did not answer within Upstream:Timeout." : $"The upstream call failed: {answer.Failure}.";
                return new MissOutcome.Error(answer.Status, "upstream_error", code, message);
            }
            if (!answer.Succeeded) return new MissOutcome.Relayed(answer);

            ChatCompletion completion;
            try
            {
                completion = ChatCompletion.Parse(answer.Body);
            }
            catch (FormatException e)
            {
                return new MissOutcome.Error(502, "upstream_error", "upstream_invalid_response", $"The upstream answer cannot be used: {e.Message}.");
            }

            try
            {
                if (lane.Kind == LaneKind.Siblings) return await GuardSiblingsAsync(miss, completion, answer);
                var (outcome, retry) = await GuardDraftAsync(miss, completion, answer, attempt, dropped);
                if (!retry) return outcome!;
                dropped++;
            }
            catch (CacheFailure f)
            {
                // The guard cannot run: answer as if there were no cache, and store nothing unguarded.
                failOpen.Record(f.Reason, f.Message);
                return new MissOutcome.Answer(completion.Body, null, 0, false, answer.Headers);
            }
        }
    }

    async Task<MissOutcome> GuardSiblingsAsync(Miss miss, ChatCompletion completion, UpstreamAnswer answer)
    {
        var lane = miss.Lane;
        var parsed = SiblingParser.Parse(completion.Content, lane.Candidates);
        var candidates = parsed.Count > lane.MaxCandidates ? parsed.Take(lane.MaxCandidates).ToList() : parsed;
        var (question, vectors) = EmbedJudged(miss, candidates);
        var judgement = SiblingGuard.Judge(question, candidates, vectors, completion.Content, lane);
        Record(miss, judgement.Kept);
        Record(miss, judgement.Dropped);
        var content = judgement.Content;
        var scores = new EntryScores(judgement.MaxKeptDrift, judgement.Dropped.Count, judgement.Kept.Select(k => k.Drift).ToArray());
        // Nothing kept is not worth keeping: the next call may well bring usable siblings.
        if (miss.Store && content.Length > 0) await StoreAsync(miss, question, content, scores, completion);
        var body = judgement.Enforced ? completion.WithContent(content) : completion.Body;
        return new MissOutcome.Answer(body, judgement.MaxKeptDrift, judgement.Dropped.Count, !judgement.Enforced, answer.Headers);
    }

    async Task<(MissOutcome? Outcome, bool Retry)> GuardDraftAsync(Miss miss, ChatCompletion completion, UpstreamAnswer answer,
        int attempt, int droppedBefore)
    {
        var lane = miss.Lane;
        var (question, drafts) = EmbedJudged(miss, [completion.Content]);
        var verdict = DraftGuard.Judge(question, drafts[0], completion.Content, lane);
        Record(miss, [verdict]);
        var dropped = droppedBefore + (verdict.Accepted ? 0 : 1);
        switch (DraftGuard.Decide(verdict, attempt, lane))
        {
            case DraftDecision.Accept:
                var scores = new EntryScores(verdict.Drift, dropped, [verdict.Drift]);
                if (miss.Store) await StoreAsync(miss, question, completion.Content, scores, completion);
                return (new MissOutcome.Answer(completion.Body, verdict.Accepted ? verdict.Drift : null, dropped,
                    lane.Mode == GuardMode.Observe, answer.Headers), false);
            case DraftDecision.Retry:
                return (null, true);
            case DraftDecision.Fallback:
                // The question stands in for the draft: retrieval degrades to the plain question. Not cached.
                return (new MissOutcome.Answer(completion.WithContent(miss.Site.Question), null, dropped, false,
                    [.. answer.Headers, KeyValuePair.Create(Header.Fallback, new[] { "question" })]), false);
            default:
                return (new MissOutcome.Error(422, "invalid_request_error", "draft_drift",
                    $"The draft drifted {Format(verdict.Drift)} from the question, above Lanes:{lane.Name}:MaxDrift = " +
                    $"{lane.MaxDrift.ToString(CultureInfo.InvariantCulture)}."), false);
        }
    }

    void Record(Miss miss, IReadOnlyList<JudgedRewrite> judged)
    {
        var lane = miss.Lane.Name;
        foreach (var j in judged)
        {
            var verdict = j.Accepted ? "accepted" : "dropped";
            ProxyMetrics.Drift.WithLabels(lane, verdict).Observe(j.Drift);
            if (!j.Accepted) tally.Dropped(lane, j.Reason ?? DropReason.Drift);
            cache.Store.AppendEvent(new EventRow(DateTimeOffset.UtcNow, lane, miss.Partition, "rewrite", miss.Site.Question, j.Text,
                j.Drift, verdict, j.Reason is { } reason ? LabelValue.Of(reason) : null));
        }
    }

    async Task StoreAsync(Miss miss, float[] questionVector, string content, EntryScores scores, ChatCompletion completion)
    {
        var entry = new NewEntry(miss.Scope, miss.Partition, miss.Lane.Name, miss.Site.Question, miss.Normalized, questionVector,
            cache.Embedder.ModelId, content, scores, completion.Model, completion.PromptTokens, completion.CompletionTokens,
            DateTimeOffset.UtcNow);
        try
        {
            await cache.AddAsync(entry, lifetime.ApplicationStopping).WaitAsync(CommitWait);
        }
        catch (CacheFailure f)
        {
            failOpen.Record(f.Reason, f.Message);
        }
        catch (TimeoutException)
        {
            log.LogWarning("store: an entry took longer than {Ms} ms to commit; answered before it landed", CommitWait.TotalMilliseconds);
        }
    }

    static async Task WriteOutcomeAsync(HttpContext context, ChatRequest request, MissOutcome outcome)
    {
        var headers = context.Response.Headers;
        switch (outcome)
        {
            case MissOutcome.Answer a:
                foreach (var (name, values) in a.UpstreamHeaders) headers[name] = values;
                if (a.MaxDrift is { } drift) headers[Header.Drift] = Format(drift);
                headers[Header.Dropped] = a.Dropped.ToString(CultureInfo.InvariantCulture);
                if (a.Observed) headers[Header.Mode] = "observe";
                await CompletionWriter.WriteAsync(context, a.Completion, request.Stream, request.IncludeUsage);
                break;
            case MissOutcome.Relayed r:
                context.Response.StatusCode = r.Upstream.Status;
                foreach (var (name, values) in r.Upstream.Headers) headers[name] = values;
                context.Response.ContentLength = r.Upstream.Body.Length;
                await context.Response.Body.WriteAsync(r.Upstream.Body, context.RequestAborted);
                break;
            case MissOutcome.Error e:
                await ErrorResponse.WriteAsync(context, e.Status, e.Message, e.Type, e.Code);
                break;
        }
    }
}
