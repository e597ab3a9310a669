using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Hosting;
using Microsoft.Extensions.Logging;
using RewriteProxy.Cache;
using RewriteProxy.Guard;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>A lane call that the cache could not answer: what the rewrite flow needs to ask upstream, judge and store.</summary>
/// <param name="Lane">The lane and its thresholds.</param>
/// <param name="Endpoint">Where the call came in: its wire format, and its path and query upstream.</param>
/// <param name="Request">The call as read.</param>
/// <param name="Site">Where the question sits in the request.</param>
/// <param name="Key">The question and where its entry may be shared.</param>
/// <param name="Headers">The client's request headers (credentials included), for the upstream call.</param>
/// <param name="Store">False under <c>Cache-Control: no-store</c>: judge, but keep nothing.</param>
/// <param name="QuestionVector">The question's vector when the lookup already computed it; null when the lookup was skipped.</param>
/// <param name="Located">False when the question is a best guess: drift then goes to the event log only, and the entry
/// is stored without a vector, so only an exact repeat of the whole message finds it.</param>
public sealed record Miss(LaneOptions Lane, LaneEndpoint Endpoint, LaneRequest Request, QuestionSite Site, CacheKey Key,
    IHeaderDictionary Headers, bool Store, float[]? QuestionVector, bool Located = true)
{
    public IWireFormat Format => Endpoint.Format;

    /// <summary>The entry's commit when it outlasted <see cref="RewriteFlow.CommitWait"/>: the answer went out before it.</summary>
    internal Task? LateCommit { get; set; }
}

/// <summary>
/// The miss flow: one upstream call per scope and question at a time (concurrent identical misses are coalesced on this
/// process, and claimed in the store across replicas that share it), the drift guard over its answer (siblings judged line by line, drafts retried or replaced by the question), every
/// judged rewrite counted and logged, and what was accepted stored before the answer goes out.
/// </summary>
public sealed class RewriteFlow(IRewriteCache cache, LaneUpstream upstream, FailOpenLog failOpen, LaneTally tally,
    RewriteProxyOptions options, IHostApplicationLifetime lifetime, ILogger<RewriteFlow> log)
{
    /// <summary>
    /// Longest a miss's response waits for its entry to be committed. Waiting is what makes an answered miss survive a
    /// crash; the bound keeps a slow disk from holding answers back (the entry still lands, later).
    /// </summary>
    public static readonly TimeSpan CommitWait = TimeSpan.FromSeconds(1);

    readonly Coalescer<MissOutcome> _coalescer = new();

    /// <summary>Answers a miss; with <paramref name="coalesce"/>, joins an identical miss already in flight (<paramref name="joined"/>).</summary>
    public Task<MissOutcome> RunAsync(Miss miss, bool coalesce, out bool joined)
    {
        joined = false;
        return coalesce
            ? _coalescer.RunAsync(miss.Key.ScopeKey + "\n" + miss.Key.Normalized, () => ClaimAndAskAsync(miss), out joined)
            : AskAsync(miss);
    }

    /// <summary>
    /// Single flight across replicas: the first to claim the question asks upstream; another replica's claim is waited
    /// for (at most Store:ClaimWait) and its entry served. A replica that cannot claim or wait (the store failing) asks
    /// upstream itself, as does one whose wait ends without an entry.
    /// </summary>
    async Task<MissOutcome> ClaimAndAskAsync(Miss miss)
    {
        // The claim outlives the holder's own longest call (retries included); a crashed holder's claim lapses after it.
        var hold = options.Upstream.Timeout * (miss.Lane.Retries + 1) + CommitWait;
        bool claimed;
        try
        {
            claimed = await cache.ClaimMissAsync(miss.Key, hold, lifetime.ApplicationStopping);
            if (!claimed)
            {
                var wait = await cache.AwaitClaimAsync(miss.Key, options.Store.ClaimWait, lifetime.ApplicationStopping);
                ProxyMetrics.ClaimWaits.WithLabels(miss.Lane.Name, LabelValue.Of(wait.Outcome)).Inc();
                if (wait.Entry is { } entry) return new MissOutcome.Shared(entry);
                claimed = await cache.ClaimMissAsync(miss.Key, hold, lifetime.ApplicationStopping);
            }
        }
        catch (CacheFailure f)
        {
            failOpen.Record(f.Reason, f.Message);
            return await AskAsync(miss);
        }
        // Not claimed twice over: another replica took the question again meanwhile; asking beats waiting a second time.
        if (!claimed) return await AskAsync(miss);
        try
        {
            return await AskAsync(miss);
        }
        finally
        {
            // Released before a late entry lands, the claim would tell the waiting replicas that this one gave up, and
            // each would ask upstream itself; so a late commit keeps it until the entry is there (or its hold runs out).
            if (miss.LateCommit is { } late) _ = ReleaseAfterAsync(late, miss.Key);
            else await cache.ReleaseMissAsync(miss.Key);
        }
    }

    async Task ReleaseAfterAsync(Task commit, CacheKey key)
    {
        try
        {
            await commit;
        }
        catch (CacheFailure f)
        {
            failOpen.Record(f.Reason, f.Message);
        }
        catch (OperationCanceledException)
        {
            // stopping
        }
        catch (Exception e)
        {
            // Whatever ended the commit, the claim is let go: waiting replicas then ask upstream themselves.
            log.LogWarning("store: a late commit failed: {Reason}", e.Message);
        }
        await cache.ReleaseMissAsync(key);
    }

    async Task<MissOutcome> AskAsync(Miss miss)
    {
        var lane = miss.Lane;
        var body = miss.Format.UpstreamBody(miss.Request);
        var dropped = 0;
        for (var attempt = 1; ; attempt++)
        {
            var answer = await upstream.CallAsync(miss.Headers, miss.Endpoint, body, lane.Name, lifetime.ApplicationStopping);
            if (answer.Failure is not null)
            {
                if (answer.Status == 504) return MissOutcome.UpstreamTimeout;
                return new MissOutcome.Error(answer.Status, "upstream_error", "upstream_unreachable", $"The upstream call failed: {answer.Failure}.");
            }
            if (!answer.Succeeded) return new MissOutcome.Relayed(answer);

            LaneAnswer completion;
            try
            {
                completion = miss.Format.ReadAnswer(answer.Body);
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

    async Task<MissOutcome> GuardSiblingsAsync(Miss miss, LaneAnswer completion, UpstreamAnswer answer)
    {
        var lane = miss.Lane;
        // The container the model used (tags, a list, JSON, a fence) is read first, so the answer can keep it.
        var container = SiblingContainer.Read(completion.Content, lane.Candidates);
        var parsed = container.Candidates;
        var candidates = parsed.Count > lane.MaxCandidates ? parsed.Take(lane.MaxCandidates).ToList() : parsed;
        var (question, vectors) = EmbedJudged(miss, candidates);
        var judgement = SiblingGuard.Judge(question, candidates, vectors, completion.Content, lane);
        Record(miss, judgement.Kept);
        Record(miss, judgement.Dropped);
        var fallback = SiblingFallback.Needed(judgement);
        var content = !judgement.Enforced ? judgement.Content
            : fallback ? SiblingFallback.Content(miss.Site.Question, container)
            : container.Render(judgement.Kept.Select(k => k.Text).ToList()) ?? judgement.Content;
        var scores = new EntryScores(judgement.MaxKeptDrift, judgement.Dropped.Count, judgement.Kept.Select(k => k.Drift).ToArray());
        // A fallback is not worth keeping: the next call may well bring usable siblings.
        if (miss.Store && !fallback && content.Length > 0) await StoreAsync(miss, question, content, scores, completion);
        var body = judgement.Enforced ? miss.Format.WithContent(completion, content) : completion.Body;
        IEnumerable<KeyValuePair<string, string[]>> headers = answer.Headers;
        if (fallback)
        {
            QuestionMetrics.Fallbacks.WithLabels(lane.Name).Inc();
            headers = [.. headers, KeyValuePair.Create(RewriteHeaders.Fallback, new[] { SiblingFallback.HeaderValue })];
        }
        return new MissOutcome.Answer(body, judgement.MaxKeptDrift, judgement.Dropped.Count, !judgement.Enforced, [.. headers]);
    }

    async Task<(MissOutcome? Outcome, bool Retry)> GuardDraftAsync(Miss miss, LaneAnswer completion, UpstreamAnswer answer,
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
                QuestionMetrics.Fallbacks.WithLabels(lane.Name).Inc();
                return (new MissOutcome.Answer(miss.Format.WithContent(completion, miss.Site.Question), null, dropped, false,
                    [.. answer.Headers, KeyValuePair.Create(RewriteHeaders.Fallback, new[] { "question" })]), false);
            default:
                return (new MissOutcome.Error(422, "invalid_request_error", "draft_drift",
                    $"The draft drifted {RewriteHeaders.Decimal(verdict.Drift)} from the question, above Lanes:{lane.Name}:MaxDrift = " +
                    $"{lane.MaxDrift.ToString(System.Globalization.CultureInfo.InvariantCulture)}."), false);
        }
    }

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

    /// <summary>Counts each judged rewrite (drift histogram, drops by reason) and writes it to the event log.</summary>
    void Record(Miss miss, IReadOnlyList<JudgedRewrite> judged)
    {
        var lane = miss.Lane.Name;
        foreach (var j in judged)
        {
            var verdict = j.Accepted ? "accepted" : "dropped";
            // Drift against a guessed question goes to the event log only: in the metrics it would set off the
            // drop-ratio alert for calls whose question was never found (they have their own counter).
            if (miss.Located)
            {
                ProxyMetrics.Drift.WithLabels(lane, verdict).Observe(j.Drift);
                if (j.Reason is { } reason) tally.Dropped(lane, reason);
            }
            cache.AppendEvent(new EventRow(DateTimeOffset.UtcNow, lane, miss.Key.PartitionHash, "rewrite", miss.Site.Question, j.Text,
                j.Drift, verdict, j.Reason is { } r ? LabelValue.Of(r) : null));
        }
    }

    async Task StoreAsync(Miss miss, float[] questionVector, string content, EntryScores scores, LaneAnswer completion)
    {
        var rewrite = new AcceptedRewrite(content, scores, completion.Model, completion.InputTokens, completion.OutputTokens);
        var commit = cache.StoreAsync(miss.Key, miss.Located ? questionVector : null, rewrite, lifetime.ApplicationStopping);
        try
        {
            await commit.WaitAsync(CommitWait);
        }
        catch (CacheFailure f)
        {
            failOpen.Record(f.Reason, f.Message);
        }
        catch (TimeoutException)
        {
            miss.LateCommit = commit;
            log.LogWarning("store: an entry took longer than {Ms} ms to commit; answered before it landed", CommitWait.TotalMilliseconds);
        }
    }
}
