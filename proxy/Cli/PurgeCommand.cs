using System.CommandLine;
using RewriteProxy.Store;

namespace RewriteProxy.Cli;

/// <remarks>What a purge deletes, as given on the command line. OlderThan stays as typed (e.g. 7d) for the admin API.</remarks>
/// <summary>Lane, Partition and OlderThan are filters (null = any); DryRun only counts; Yes deletes without asking.</summary>
public sealed record PurgeRequest(string? Lane, string? Partition, string? OlderThan, bool DryRun, bool Yes)
{
    public PurgeFilter Filter(TimeSpan? olderThan) => new(Lane, Partition, olderThan);
}

/// <summary>
/// <c>rewriteproxy purge</c>: deletes entries by lane, partition and/or age, from the store or through a running
/// proxy's <c>POST /admin/purge</c>. At least one filter is required. <c>--dry-run</c> only counts (the store only:
/// the admin API has no count). Deleting asks for confirmation on a terminal; when stdin is not a terminal (CI,
/// pipes) nothing is asked and <c>--yes</c> is required.
/// </summary>
public static class PurgeCommand
{
    static readonly StatsTarget.Options Target = new();
    static readonly Option<string?> Lane = new("--lane") { Description = "Only entries of this lane." };
    static readonly Option<string?> Partition = new("--partition") { Description = "Only entries of this partition hash." };
    static readonly Option<string?> OlderThan = new("--older-than") { Description = "Only entries created longer ago than this, e.g. 7d or 12h." };
    static readonly Option<bool> DryRun = new("--dry-run") { Description = "Count what would be deleted; delete nothing (reads the store; not with --url)." };
    static readonly Option<bool> Yes = new("--yes") { Description = "Delete without asking; required when stdin is not a terminal." };

    public static Command Create()
    {
        var command = new Command("purge", "Delete cache entries by lane, partition and/or age.") { Lane, Partition, OlderThan, DryRun, Yes };
        Target.AddTo(command);
        command.TreatUnmatchedTokensAsErrors = false;
        command.SetAction(async (parse, cancel) =>
        {
            var request = new PurgeRequest(parse.GetValue(Lane), parse.GetValue(Partition), parse.GetValue(OlderThan),
                parse.GetValue(DryRun), parse.GetValue(Yes));
            if (request is { Lane: null, Partition: null, OlderThan: null })
            {
                Console.Error.WriteLine("rewriteproxy: purge: give at least one of --lane, --partition, --older-than " +
                    "(to empty the whole cache, purge each lane with --lane)");
                return ExitCodes.BadConfiguration;
            }
            if (Target.Resolve(parse, "purge") is not { } target) return ExitCodes.BadConfiguration;
            return await RunAsync(target, request, Console.IsInputRedirected ? null : Console.In, Console.Out, Console.Error, cancel);
        });
        return command;
    }

    /// <summary>Counts, asks (on <c>terminal</c>, null when stdin is not a terminal: then --yes is required) and deletes.</summary>
    public static async Task<int> RunAsync(StatsTarget target, PurgeRequest request, TextReader? terminal, TextWriter stdout,
        TextWriter stderr, CancellationToken cancel)
    {
        TimeSpan? age = null;
        if (request.OlderThan is { } text)
        {
            if (!DurationText.TryParse(text, out var parsed) || parsed <= TimeSpan.Zero)
            {
                await stderr.WriteLineAsync($"rewriteproxy: purge: --older-than '{text}' is not a duration; use e.g. 7d, 12h or 30m");
                return ExitCodes.BadConfiguration;
            }
            age = parsed;
        }
        var filter = request.Filter(age);
        if (filter.IsEmpty)
        {
            await stderr.WriteLineAsync("rewriteproxy: purge: give at least one of --lane, --partition, --older-than");
            return ExitCodes.BadConfiguration;
        }
        var what = Describe(request);
        try
        {
            long? count = null;
            if (target.Url is null) count = await CountMatchingAsync(target.Store!, filter, cancel);
            else if (request.DryRun)
            {
                await stderr.WriteLineAsync("rewriteproxy: purge: --dry-run reads the store (leave out --url): the admin API deletes but does not count");
                return ExitCodes.BadConfiguration;
            }
            if (request.DryRun)
            {
                await stdout.WriteLineAsync($"would delete {count} entries ({what}); nothing deleted (--dry-run)");
                return ExitCodes.Ok;
            }
            if (count == 0)
            {
                await stdout.WriteLineAsync($"no entries match ({what}); nothing deleted");
                return ExitCodes.Ok;
            }
            if (!request.Yes)
            {
                if (terminal is null)
                {
                    await stderr.WriteLineAsync($"rewriteproxy: purge: stdin is not a terminal, so nothing is asked: add --yes to delete " +
                        $"{(count is { } n ? $"the {n} entries" : "the entries")} ({what}), or --dry-run to count");
                    return ExitCodes.Failed;
                }
                await stdout.WriteAsync($"Delete {(count is { } c ? $"{c} entries" : "the entries")} ({what})? [y/N] ");
                var answer = (await terminal.ReadLineAsync(cancel))?.Trim();
                if (answer is not ("y" or "Y" or "yes"))
                {
                    await stdout.WriteLineAsync("nothing deleted");
                    return ExitCodes.Ok;
                }
            }
            var deleted = target.Url is null
                ? await PurgeStoreAsync(target.Store!, filter, cancel)
                : await PurgeRemoteAsync(target, request, cancel);
            await stdout.WriteLineAsync($"deleted {deleted} entries ({what})");
            return ExitCodes.Ok;
        }
        catch (Exception e) when (e is StoreException or AdminCallException)
        {
            await stderr.WriteLineAsync($"rewriteproxy: purge: {e.Message}");
            return ExitCodes.Failed;
        }
    }

    static string Describe(PurgeRequest r) => string.Join(", ", new[]
    {
        r.Lane is null ? null : $"lane {r.Lane}",
        r.Partition is null ? null : $"partition {r.Partition}",
        r.OlderThan is null ? null : $"older than {r.OlderThan}",
    }.Where(p => p is not null));

    /// <summary>Counts on a read-only open of the store, by the condition the store's purge deletes by.</summary>
    public static async Task<long> CountMatchingAsync(StoreOptions options, PurgeFilter filter, CancellationToken cancel)
    {
        await using var store = await CliStore.OpenAsync(options, StoreAccess.ReadOnly, cancel);
        return await store.CountMatchingAsync(filter, cancel);
    }

    /// <summary>
    /// Deletes through the store's own purge (one transaction). A proxy running on the same store learns of it from the
    /// store's change feed and drops the entries from its index within its poll; --url deletes through that proxy.
    /// </summary>
    static async Task<long> PurgeStoreAsync(StoreOptions options, PurgeFilter filter, CancellationToken cancel)
    {
        await using var store = await CliStore.OpenAsync(options, StoreAccess.ReadWrite, cancel);
        return (await store.PurgeAsync(filter, cancel)).Count;
    }

    static async Task<long> PurgeRemoteAsync(StatsTarget target, PurgeRequest request, CancellationToken cancel)
    {
        using var client = new AdminClient(target.AdminRoot, target.Token!);
        return await client.PurgeAsync(request.Lane, request.Partition, request.OlderThan, cancel);
    }
}
