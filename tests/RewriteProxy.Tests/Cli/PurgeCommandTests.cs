using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Cli;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cli;

[Collection(ConsoleCollection.Name)]
public class PurgeCommandTests
{
    const string AdminToken = "tune-tests-admin-token-0123456789";

    /// <summary>A bike-share store: two fresh and one 10-day-old draft entry, one fresh siblings entry of another partition.</summary>
    static async Task<string> StoreAsync()
    {
        var path = Path.Combine(CliTestKit.NewFolder(), "cache.db");
        await using var store = await CliTestKit.OpenStoreAsync(path);
        await FillAsync(store);
        return path;
    }

    static async Task FillAsync(IRewriteStore store)
    {
        await store.AddAsync(CliTestKit.Entry("draft", "How much is a day pass?"), CancellationToken.None);
        await store.AddAsync(CliTestKit.Entry("draft", "Where can I leave a bike overnight?"), CancellationToken.None);
        await store.AddAsync(CliTestKit.Entry("draft", "Can I ride a bike share in the rain?", created: DateTimeOffset.UtcNow - TimeSpan.FromDays(10)),
            CancellationToken.None);
        await store.AddAsync(CliTestKit.Entry("siblings", "How do I unlock a bike?", partition: "p-other"), CancellationToken.None);
    }

    static Task<long> EntriesAsync(string path, string lane) =>
        PurgeCommand.CountMatchingAsync(new StoreOptions { Path = path }, new PurgeFilter(Lane: lane), CancellationToken.None);

    static async Task<(int Code, string Out, string Err)> RunAsync(StatsTarget target, PurgeRequest request, TextReader? terminal = null)
    {
        var (stdout, stderr) = (new StringWriter(), new StringWriter());
        var code = await PurgeCommand.RunAsync(target, request, terminal, stdout, stderr, CancellationToken.None);
        return (code, stdout.ToString(), stderr.ToString());
    }

    [Fact]
    public async Task Dry_run_counts_the_matching_entries_and_deletes_nothing()
    {
        var path = await StoreAsync();
        var (code, output, _) = await RunAsync(CliTestKit.Target(path), new PurgeRequest("draft", null, "7d", DryRun: true, Yes: false));

        Assert.Equal(ExitCodes.Ok, code);
        Assert.Contains("would delete 1 entries (lane draft, older than 7d)", output);
        Assert.Equal(3, await EntriesAsync(path, "draft"));
    }

    [Fact]
    public async Task Without_a_terminal_purge_deletes_only_with_yes()
    {
        var path = await StoreAsync();
        var target = CliTestKit.Target(path);

        var refused = await RunAsync(target, new PurgeRequest("draft", null, null, DryRun: false, Yes: false), terminal: null);
        Assert.Equal(ExitCodes.Failed, refused.Code);
        Assert.Contains("add --yes to delete the 3 entries", refused.Err);
        Assert.Equal(3, await EntriesAsync(path, "draft"));

        var done = await RunAsync(target, new PurgeRequest("draft", null, null, DryRun: false, Yes: true));
        Assert.Equal(ExitCodes.Ok, done.Code);
        Assert.Contains("deleted 3 entries (lane draft)", done.Out);
        Assert.Equal(0, await EntriesAsync(path, "draft"));
        Assert.Equal(1, await EntriesAsync(path, "siblings"));
        var stats = await StatsCommand.ReadAsync(target, CancellationToken.None);
        Assert.DoesNotContain(stats["lanes"]!.AsArray(), l => (string)l!["lane"]! == "draft" && (long)l["entries"]! > 0);
    }

    [Fact]
    public async Task On_a_terminal_purge_asks_and_deletes_only_on_yes()
    {
        var path = await StoreAsync();
        var target = CliTestKit.Target(path);

        var no = await RunAsync(target, new PurgeRequest(null, "p-other", null, false, false), new StringReader("n\n"));
        Assert.Contains("Delete 1 entries (partition p-other)? [y/N]", no.Out);
        Assert.Equal(1, await EntriesAsync(path, "siblings"));

        var yes = await RunAsync(target, new PurgeRequest(null, "p-other", null, false, false), new StringReader("y\n"));
        Assert.Equal(ExitCodes.Ok, yes.Code);
        Assert.Equal(0, await EntriesAsync(path, "siblings"));
        Assert.Equal(3, await EntriesAsync(path, "draft"));
    }

    [Fact]
    public async Task Purge_without_a_filter_is_refused_before_touching_the_store()
    {
        var error = new StringWriter();
        var before = Console.Error;
        Console.SetError(error);
        int code;
        try
        {
            code = await RootCommandFactory.Create().Parse(["purge", "--store", "/nonexistent/cache.db", "--yes"]).InvokeAsync();
        }
        finally
        {
            Console.SetError(before);
        }
        Assert.Equal(ExitCodes.BadConfiguration, code);
        Assert.Contains("give at least one of --lane, --partition, --older-than", error.ToString());
    }

    [Fact]
    public async Task An_unparsable_age_is_refused()
    {
        var path = await StoreAsync();
        var (code, _, err) = await RunAsync(CliTestKit.Target(path), new PurgeRequest(null, null, "a week", false, true));
        Assert.Equal(ExitCodes.BadConfiguration, code);
        Assert.Contains("--older-than 'a week' is not a duration", err);
        Assert.Equal(3, await EntriesAsync(path, "draft"));
    }

    [Fact]
    public async Task Purge_through_the_admin_API_deletes_and_reports_the_count()
    {
        await using var proxy = await TestProxy.StartAsync(new Uri("http://127.0.0.1:9/v1/"), new Dictionary<string, string?> { ["Admin:Token"] = AdminToken });
        await FillAsync(proxy.Services.GetRequiredService<IRewriteStore>());
        var target = new StatsTarget(null, proxy.Root, AdminToken);

        var dry = await RunAsync(target, new PurgeRequest("draft", null, null, DryRun: true, Yes: false));
        Assert.Equal(ExitCodes.BadConfiguration, dry.Code); // the admin API cannot count

        var (code, output, err) = await RunAsync(target, new PurgeRequest("draft", null, "7d", false, Yes: true));
        Assert.True(code == ExitCodes.Ok, err);
        Assert.Contains("deleted 1 entries (lane draft, older than 7d)", output);
        Assert.Equal(2, await EntriesAsync(proxy.Options.Store.Path, "draft"));
    }
}
