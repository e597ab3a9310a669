using Microsoft.AspNetCore.Http;
using RewriteProxy.Cache;
using RewriteProxy.Forwarding;
using RewriteProxy.Guard;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// A lane call from its endpoint to its answer. Reads the request, finds the question and its scope, and sends the call
/// where it belongs: a hit is answered from the cache, a miss goes to the <see cref="RewriteFlow"/>, and a call a cache
/// cannot stand in for, a <c>no-store</c> lookup or any failure of the cache side goes to the upstream untouched. A call
/// with <c>only-if-cached</c> never goes upstream: it is a hit or a 504 (<see cref="CacheProbe"/>).
/// </summary>
public sealed class LaneRouter(RewriteProxyOptions options, IRewriteCache cache, RewriteFlow rewrites, Passthrough passthrough,
    FailOpenLog failOpen, LaneTally tally, QuestionFinder finder)
{
    public async Task HandleAsync(HttpContext context, string laneName, LaneEndpoint endpoint)
    {
        var format = endpoint.Format;
        if (!options.Lanes.TryGetValue(laneName, out var lane))
        {
            await LaneEndpoints.UnknownLaneAsync(context, options, laneName);
            return;
        }

        var body = await RequestBody.ReadAsync(context, options.Limits.MaxRequestBytes, format);
        if (body is null) return;
        LaneRequest request;
        try
        {
            request = format.Read(body, endpoint.PathModel);
        }
        catch (ChatRequestException e)
        {
            await format.WriteErrorAsync(context, 400, e.Message, "invalid_request_error", "invalid_request");
            return;
        }

        var directives = CacheDirectives.Parse(context.Request.Headers.CacheControl);
        var extraction = QuestionExtractor.Extract(request, lane);
        if (extraction.Site is not { } site)
        {
            context.Response.Headers[RewriteHeaders.Bypass] = LabelValue.Of(extraction.BypassReason!.Value);
            if (directives.OnlyIfCached) await CacheProbe.WriteUnansweredAsync(context, tally, lane.Name, format, CacheProbe.Unanswered.NotCacheable);
            else await BypassAsync(context, lane, endpoint, body);
            return;
        }

        var partition = PartitionKey.Of(options.Partition, context.Request.Headers);
        var versions = VersionHeaders(context, format);
        var located = finder.Resolve(lane, site, partition, s => ScopeKey.Compute(lane, endpoint, request, s, partition, versions));
        context.Response.Headers[RewriteHeaders.Question] = located.HeaderValue;
        site = located.Site;
        // An unlocated call's entry is kept under its whole message, the only text it can be known by for sure.
        var key = new CacheKey(lane.Name, located.Scope, partition, located.Confident ? site.Question : site.MessageText, located.Normalized);

        float[]? questionVector = null;
        var lookUp = !directives.NoCache && !directives.NoStore;
        if (directives.OnlyIfCached && !lookUp)
        {
            await CacheProbe.WriteUnansweredAsync(context, tally, lane.Name, format, CacheProbe.Unanswered.LookupForbidden);
            return;
        }
        if (lookUp)
        {
            LookupResult found;
            try
            {
                // Unsure where the question is: only the whole message, exactly, is safe to look up.
                var aborted = context.RequestAborted;
                found = located.Confident ? await cache.LookupAsync(key, lane.HitSimilarity, aborted) : await cache.LookupExactAsync(key, aborted);
                if (found.Kind == LookupKind.Miss && located.EarlierScope is { } earlier
                    && await cache.LookupExactAsync(key with { ScopeKey = earlier, Normalized = located.WholeNormalized! }, aborted)
                        is { Kind: LookupKind.HitExact } before)
                    found = before;
            }
            catch (CacheFailure f)
            {
                failOpen.Record(f.Reason, f.Message);
                if (directives.OnlyIfCached) await CacheProbe.WriteUnansweredAsync(context, tally, lane.Name, format, CacheProbe.Unanswered.CacheFailed);
                else await BypassAsync(context, lane, endpoint, body);
                return;
            }
            if (found.Entry is { } entry)
            {
                if (directives.OnlyIfCached) CacheProbe.CountHit(tally, lane.Name);
                else CountHit(lane, found, entry);
                await AnswerWriter.WriteHitAsync(context, request, found);
                return;
            }
            questionVector = found.QuestionVector;
        }
        if (directives.OnlyIfCached)
        {
            await CacheProbe.WriteUnansweredAsync(context, tally, lane.Name, format, CacheProbe.Unanswered.NoEntry);
            return;
        }

        // While unsure, the drift guard measures against the best guess and drops nothing.
        var guarded = located.Confident ? lane : lane with { Mode = GuardMode.Observe };
        var miss = new Miss(guarded, endpoint, request, site, key, context.Request.Headers, Store: !directives.NoStore, questionVector,
            located.Confident);
        MissOutcome outcome;
        var joined = false;
        try
        {
            // A caller that joined another's call waits no longer than its own call could have taken.
            outcome = await rewrites.RunAsync(miss, coalesce: lookUp, out joined)
                .WaitAsync(options.Upstream.Timeout + RewriteFlow.CommitWait, context.RequestAborted);
        }
        catch (TimeoutException)
        {
            outcome = MissOutcome.UpstreamTimeout;
        }
        catch (OperationCanceledException) when (context.RequestAborted.IsCancellationRequested)
        {
            // The client left; a coalesced call goes on for the others and is still stored.
            return;
        }
        // Joined on this process, or served the entry of another replica's call on the same question.
        if (joined || outcome is MissOutcome.Shared) ProxyMetrics.Coalesced.WithLabels(lane.Name).Inc();
        var result = directives.NoStore ? CacheResult.Bypass : CacheResult.Miss;
        tally.Lookup(lane.Name, result);
        context.Response.Headers[RewriteHeaders.Cache] = RewriteHeaders.CacheValue(result);
        await AnswerWriter.WriteMissAsync(context, request, outcome);
    }

    /// <summary>The values of the headers the format scopes on (Anthropic's API version and betas), with their names.</summary>
    static string VersionHeaders(HttpContext context, IWireFormat format) => string.Join("\n",
        format.ScopeHeaders.Select(h => h + ": " + context.Request.Headers[h].ToString()));

    void CountHit(LaneOptions lane, LookupResult found, StoredEntry entry)
    {
        var semantic = found.Kind == LookupKind.HitSemantic;
        tally.Lookup(lane.Name, semantic ? CacheResult.HitSemantic : CacheResult.HitExact);
        tally.Saved(lane.Name, AnswerWriter.SavedTokens(entry));
        if (semantic) ProxyMetrics.HitSimilarity.WithLabels(lane.Name).Observe(found.Similarity!.Value);
        cache.RecordHit(entry);
    }

    /// <summary>Forwards the call untouched, uncached (a bypass, or a fail-open).</summary>
    async Task BypassAsync(HttpContext context, LaneOptions lane, LaneEndpoint endpoint, byte[] body)
    {
        tally.Lookup(lane.Name, CacheResult.Bypass);
        context.Response.Headers[RewriteHeaders.Cache] = RewriteHeaders.CacheValue(CacheResult.Bypass);
        context.Request.Headers.Remove(RewriteHeaders.Lane);
        context.Request.Body = new MemoryStream(body, writable: false);
        context.Request.ContentLength = body.Length;
        await passthrough.ForwardAsync(context, endpoint.UpstreamPath);
    }
}
