using Microsoft.AspNetCore.Http;
using RewriteProxy.Cache;
using RewriteProxy.Forwarding;
using RewriteProxy.Telemetry;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// A lane call from its endpoint to its answer. Reads the request, finds the question and its scope, and sends the call
/// where it belongs: a hit is answered from the cache, a miss goes to the <see cref="RewriteFlow"/>, and a call a cache
/// cannot stand in for, a <c>no-store</c> lookup or any failure of the cache side goes to the upstream untouched.
/// </summary>
public sealed class LaneRouter(RewriteProxyOptions options, IRewriteCache cache, RewriteFlow rewrites, Passthrough passthrough,
    FailOpenLog failOpen, LaneTally tally)
{
    public async Task HandleAsync(HttpContext context, string laneName, IWireFormat format)
    {
        if (!options.Lanes.TryGetValue(laneName, out var lane))
        {
            await LaneEndpoints.UnknownLaneAsync(context, options, laneName);
            return;
        }

        var body = await RequestBody.ReadAsync(context, options.Limits.MaxRequestBytes);
        if (body is null) return;
        ChatRequest request;
        try
        {
            request = format.ReadRequest(body);
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
            context.Response.Headers[RewriteHeaders.Bypass] = LabelValue.Of(extraction.BypassReason!.Value);
            await BypassAsync(context, lane, format, body);
            return;
        }

        var partition = PartitionKey.Of(options.Partition, context.Request.Headers);
        var key = new CacheKey(lane.Name, ScopeKey.Compute(lane, request, site, partition), partition, site.Question,
            QuestionText.Normalize(site.Question));

        float[]? questionVector = null;
        var lookUp = !directives.NoCache && !directives.NoStore;
        if (lookUp)
        {
            LookupResult found;
            try
            {
                found = cache.Lookup(key, lane.HitSimilarity);
            }
            catch (CacheFailure f)
            {
                failOpen.Record(f.Reason, f.Message);
                await BypassAsync(context, lane, format, body);
                return;
            }
            if (found.Entry is { } entry)
            {
                CountHit(lane, found, entry);
                await AnswerWriter.WriteHitAsync(context, format, request, found);
                return;
            }
            questionVector = found.QuestionVector;
        }

        var miss = new Miss(lane, format, request, site, key, context.Request.Headers, Store: !directives.NoStore, questionVector);
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
        if (joined) ProxyMetrics.Coalesced.WithLabels(lane.Name).Inc();
        var result = directives.NoStore ? CacheResult.Bypass : CacheResult.Miss;
        tally.Lookup(lane.Name, result);
        context.Response.Headers[RewriteHeaders.Cache] = RewriteHeaders.CacheValue(result);
        await AnswerWriter.WriteMissAsync(context, format, request, outcome);
    }

    void CountHit(LaneOptions lane, LookupResult found, StoredEntry entry)
    {
        var semantic = found.Kind == LookupKind.HitSemantic;
        tally.Lookup(lane.Name, semantic ? CacheResult.HitSemantic : CacheResult.HitExact);
        tally.Saved(lane.Name, AnswerWriter.SavedTokens(entry));
        if (semantic) ProxyMetrics.HitSimilarity.WithLabels(lane.Name).Observe(found.Similarity!.Value);
        cache.RecordHit(entry);
    }

    /// <summary>Forwards the call untouched, uncached (a bypass, or a fail-open).</summary>
    async Task BypassAsync(HttpContext context, LaneOptions lane, IWireFormat format, byte[] body)
    {
        tally.Lookup(lane.Name, CacheResult.Bypass);
        context.Response.Headers[RewriteHeaders.Cache] = RewriteHeaders.CacheValue(CacheResult.Bypass);
        context.Request.Headers.Remove(RewriteHeaders.Lane);
        context.Request.Body = new MemoryStream(body, writable: false);
        context.Request.ContentLength = body.Length;
        await passthrough.ForwardAsync(context, format.UpstreamPath);
    }
}
