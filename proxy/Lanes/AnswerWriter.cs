using Microsoft.AspNetCore.Http;
using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>
/// Writes a lane call's answer: the <c>X-Rewrite-*</c> headers, then the body in the call's own wire format. A hit is
/// written from its entry; a miss from what the rewrite flow produced.
/// </summary>
public static class AnswerWriter
{
    /// <summary>A hit: the entry's content with the scores its miss reported, so a hit says what the miss said.</summary>
    public static Task WriteHitAsync(HttpContext context, LaneRequest request, LookupResult found)
    {
        var headers = context.Response.Headers;
        var semantic = found.Kind == LookupKind.HitSemantic;
        headers[RewriteHeaders.Cache] = RewriteHeaders.CacheValue(semantic ? CacheResult.HitSemantic : CacheResult.HitExact);
        if (semantic) headers[RewriteHeaders.Similarity] = RewriteHeaders.Decimal(found.Similarity!.Value);
        return WriteEntryAsync(context, request, found.Entry!);
    }

    /// <summary>An entry's content, with the scores its miss reported, in the call's format.</summary>
    static Task WriteEntryAsync(HttpContext context, LaneRequest request, StoredEntry entry)
    {
        var headers = context.Response.Headers;
        if (entry.Scores.MaxDrift is { } drift) headers[RewriteHeaders.Drift] = RewriteHeaders.Decimal(drift);
        headers[RewriteHeaders.Dropped] = RewriteHeaders.Count(entry.Scores.Dropped);
        headers[RewriteHeaders.SavedTokens] = RewriteHeaders.Count(SavedTokens(entry));
        var answer = request.Format.FromEntry(request, entry.ResponseModel ?? request.Model, entry.Content, (int)entry.PromptTokens,
            (int)entry.CompletionTokens);
        return request.Format.WriteAsync(context, answer, request);
    }

    /// <summary>The upstream tokens a hit on <paramref name="entry"/> did not spend.</summary>
    public static long SavedTokens(StoredEntry entry) => entry.PromptTokens + entry.CompletionTokens;

    /// <summary>A miss: the guarded answer, the upstream's own error relayed as it came, or an error of the proxy's.</summary>
    public static async Task WriteMissAsync(HttpContext context, LaneRequest request, MissOutcome outcome)
    {
        var headers = context.Response.Headers;
        switch (outcome)
        {
            case MissOutcome.Answer a:
                foreach (var (name, values) in a.UpstreamHeaders) headers[name] = values;
                if (a.MaxDrift is { } drift) headers[RewriteHeaders.Drift] = RewriteHeaders.Decimal(drift);
                headers[RewriteHeaders.Dropped] = RewriteHeaders.Count(a.Dropped);
                if (a.Observed) headers[RewriteHeaders.Mode] = "observe";
                await request.Format.WriteAsync(context, a.Completion, request);
                break;
            case MissOutcome.Relayed r:
                context.Response.StatusCode = r.Upstream.Status;
                foreach (var (name, values) in r.Upstream.Headers) headers[name] = values;
                context.Response.ContentLength = r.Upstream.Body.Length;
                await context.Response.Body.WriteAsync(r.Upstream.Body, context.RequestAborted);
                break;
            case MissOutcome.Shared s:
                await WriteEntryAsync(context, request, s.Entry);
                break;
            case MissOutcome.Error e:
                await request.Format.WriteErrorAsync(context, e.Status, e.Message, e.Type, e.Code);
                break;
        }
    }
}
