using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Http;
using Microsoft.AspNetCore.Routing;
using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Wire;

namespace RewriteProxy.Admin;

/// <summary>
/// <c>/admin</c>: stats, entry listing and search, delete, purge. Bearer <c>Admin:Token</c>, compared in constant time;
/// without a token configured the whole API answers 404, as if it were not there.
/// </summary>
public static class AdminEndpoints
{
    /// <summary>Most entries one listing returns.</summary>
    const int MaxListed = 500;

    public static void Map(WebApplication app, RewriteProxyOptions options)
    {
        var admin = app.MapGroup("/admin");
        admin.AddEndpointFilter(async (invocation, next) =>
        {
            var context = invocation.HttpContext;
            if (options.Admin.Token is not { } token)
            {
                await ErrorResponse.WriteAsync(context, 404, "The admin API is off; set Admin:Token to turn it on.",
                    "invalid_request_error", "admin_off");
                return Results.Empty; // the response is written; nothing more to serialise
            }
            if (!Authorized(context.Request.Headers.Authorization.ToString(), token))
            {
                context.Response.Headers.WWWAuthenticate = "Bearer";
                await ErrorResponse.WriteAsync(context, 401, "A valid admin bearer token is required.", "authentication_error", "unauthorized");
                return Results.Empty; // the response is written; nothing more to serialise
            }
            return await next(invocation);
        });

        admin.MapGet("/stats", (IRewriteStore store, CancellationToken cancel) =>
            GuardedAsync(async () => Results.Json(StatsBody(await store.StatsAsync(cancel)))));

        admin.MapGet("/entries", (IRewriteStore store, string? lane, string? partition, string? q, int? limit, CancellationToken cancel) =>
            GuardedAsync(async () =>
        {
            var rows = await store.ListAsync(new EntryQuery(lane, partition, q, Math.Clamp(limit ?? 50, 1, MaxListed)), cancel);
            return Results.Json(new
            {
                entries = rows.Select(e => new
                {
                    id = e.Id,
                    lane = e.Lane,
                    partition = e.PartitionHash,
                    question = e.Question,
                    content = e.Content,
                    // Spelled as the store writes them (MaxDrift, Dropped, Drifts), as this listing always has.
                    scores = JsonSerializer.SerializeToElement(e.Scores),
                    created = e.Created,
                    lastHit = e.LastHit,
                    hitCount = e.HitCount,
                }),
            });
        }));

        admin.MapDelete("/entries/{id:long}", (IRewriteStore store, long id, CancellationToken cancel) => GuardedAsync(async () =>
        {
            var deleted = await store.PurgeAsync(new PurgeFilter(Id: id), cancel);
            return deleted.Count == 0 ? Results.NotFound() : Results.NoContent();
        }));

        admin.MapPost("/purge", async (HttpContext context, IRewriteStore store, CancellationToken cancel) =>
        {
            PurgeRequest? request;
            try
            {
                request = await JsonSerializer.DeserializeAsync<PurgeRequest>(context.Request.Body,
                    new JsonSerializerOptions { PropertyNameCaseInsensitive = true }, cancel);
            }
            catch (JsonException e)
            {
                return Error(400, $"The purge request is not valid JSON: {e.Message}");
            }
            TimeSpan? olderThan = null;
            if (request?.OlderThan is { } text)
            {
                if (!DurationText.TryParse(text, out var age) || age <= TimeSpan.Zero)
                    return Error(400, $"olderThan = '{text}' is not a duration; use e.g. 7d, 12h, 30m.");
                olderThan = age;
            }
            var filter = new PurgeFilter(request?.Lane, request?.Partition, olderThan);
            if (filter.IsEmpty) return Error(400, "A purge needs at least one of lane, partition, olderThan.");
            return await GuardedAsync(async () => Results.Json(new { deleted = (await store.PurgeAsync(filter, cancel)).Count }));
        });
    }

    sealed record PurgeRequest(string? Lane, string? Partition, string? OlderThan);

    public static object StatsBody(StoreStats stats) => new
    {
        storeBytes = stats.Bytes,
        lanes = stats.Lanes.Select(l => new
        {
            lane = l.Lane,
            entries = l.Entries,
            hitExact = l.HitExact,
            hitSemantic = l.HitSemantic,
            miss = l.Miss,
            bypass = l.Bypass,
            hitRatio = l.HitRatio,
            tokensSaved = l.TokensSaved,
            dropsByReason = l.DropsByReason,
            refusalsByReason = l.RefusalsByReason,
            questionsBySource = l.Questions,
        }),
        templates = stats.Templates.Select(t => new
        {
            lane = t.Lane,
            partition = t.PartitionHash,
            template = t.Prefix + TemplateQuestion + t.Suffix,
            learnedFrom = t.LearnedFrom,
            learnedAt = t.LearnedAt,
        }),
    };

    /// <summary>Where the question sits in a learned template, as /admin and <c>rewriteproxy stats</c> show it.</summary>
    public const string TemplateQuestion = "{question}";

    static IResult Error(int status, string message) =>
        Results.Json(new { error = new { message, type = "invalid_request_error", code = "invalid_request" } }, statusCode: status);

    static async Task<IResult> GuardedAsync(Func<Task<IResult>> work)
    {
        try
        {
            return await work();
        }
        catch (StoreException e)
        {
            return StoreDown(e);
        }
    }

    static IResult StoreDown(StoreException e) =>
        Results.Json(new { error = new { message = e.Message, type = "store_error", code = "store_unavailable" } }, statusCode: 503);

    /// <summary>Hashing both sides first makes the comparison constant-time whatever the lengths.</summary>
    static bool Authorized(string header, string token)
    {
        const string prefix = "Bearer ";
        if (!header.StartsWith(prefix, StringComparison.OrdinalIgnoreCase)) return false;
        var given = SHA256.HashData(Encoding.UTF8.GetBytes(header[prefix.Length..].Trim()));
        var expected = SHA256.HashData(Encoding.UTF8.GetBytes(token));
        return CryptographicOperations.FixedTimeEquals(given, expected);
    }
}
