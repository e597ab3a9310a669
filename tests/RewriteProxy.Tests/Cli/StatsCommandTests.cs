using System.Text.Json.Nodes;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Cli;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cli;

[Collection(ConsoleCollection.Name)]
public class StatsCommandTests
{
    const string AdminToken = "tune-tests-admin-token-0123456789";

    /// <summary>Two lanes of an invented water utility: three draft entries with lookups and drops, one siblings entry.</summary>
    static async Task FillAsync(IRewriteStore store)
    {
        await store.AddAsync(CliTestKit.Entry("draft", "How do I report a burst water main?"), CancellationToken.None);
        await store.AddAsync(CliTestKit.Entry("draft", "Why does my tap water smell of chlorine?"), CancellationToken.None);
        await store.AddAsync(CliTestKit.Entry("draft", "When is the water bill due?"), CancellationToken.None);
        await store.AddAsync(CliTestKit.Entry("siblings", "Is the tap water safe to drink?"), CancellationToken.None);
        store.Count("draft", Tally.Lookup("hit_exact"), 5);
        store.Count("draft", Tally.Lookup("hit_semantic"), 3);
        store.Count("draft", Tally.Lookup("miss"), 8);
        store.Count("draft", Tally.Lookup("bypass"), 4);
        store.Count("draft", Tally.TokensSaved, 800);
        store.Count("draft", Tally.Dropped("drift"), 2);
        store.Count("siblings", Tally.Dropped("duplicate"), 1);
        store.Count("siblings", Tally.Refused("number"), 6);
        await store.FlushAsync(CancellationToken.None);
    }

    [Fact]
    public async Task Stats_of_a_store_file_give_entries_hits_hit_ratio_tokens_and_drops_per_lane()
    {
        var path = Path.Combine(CliTestKit.NewFolder(), "cache.db");
        await using (var store = await CliTestKit.OpenStoreAsync(path)) await FillAsync(store);

        var body = await StatsCommand.ReadAsync(CliTestKit.Target(path), CancellationToken.None);

        var draft = body["lanes"]!.AsArray().Single(l => (string)l!["lane"]! == "draft")!;
        Assert.Equal(3, (long)draft["entries"]!);
        // By hand: (5 exact + 3 semantic) / (8 hits + 8 misses) = 0.5; the 4 bypassed calls never asked the cache.
        Assert.Equal(0.5, (double)draft["hitRatio"]!, 12);
        Assert.Equal(800, (long)draft["tokensSaved"]!);
        Assert.Equal(2, (long)draft["dropsByReason"]!["drift"]!);
        var siblings = body["lanes"]!.AsArray().Single(l => (string)l!["lane"]! == "siblings")!;
        Assert.Null(siblings["hitRatio"]); // no lookups yet: no ratio rather than 0
        Assert.True((long)body["storeBytes"]! >= new FileInfo(path).Length);

        var (console, text) = CliTestKit.Console80();
        Assert.Equal(ExitCodes.Ok, await StatsCommand.RunAsync(CliTestKit.Target(path), json: false, console, TextWriter.Null, CancellationToken.None));
        var output = text.ToString();
        Assert.Matches(@"draft\s+3\s+8\s+8\s+50\.0%\s+800", output);
        Assert.Matches(@"siblings\s+refused\s+number\s+6", output);
        Assert.All(output.Split('\n'), line => Assert.True(line.TrimEnd().Length <= 80, line));
    }

    [Fact]
    public async Task Stats_show_how_questions_were_found_and_the_learned_templates_in_80_columns()
    {
        var path = Path.Combine(CliTestKit.NewFolder(), "cache.db");
        await using (var store = await CliTestKit.OpenStoreAsync(path))
        {
            store.Count("siblings", Tally.Question("template"), 40);
            store.Count("siblings", Tally.Question("unlocated"), 2);
            store.SaveTemplate(new TemplateRow("key", "siblings", "partition",
                "You are an assistant for the water utility's help desk. Write related questions.\n\nOriginal question: ", "", 3,
                DateTimeOffset.Parse("2026-12-02T04:30:00Z")));
            await store.FlushAsync(CancellationToken.None);
        }

        var body = await StatsCommand.ReadAsync(CliTestKit.Target(path), CancellationToken.None);
        var template = Assert.Single(body["templates"]!.AsArray())!;
        Assert.EndsWith("Original question: {question}", (string)template["template"]!);
        Assert.Equal(3, (int)template["learnedFrom"]!);

        var (console, text) = CliTestKit.Console80();
        Assert.Equal(ExitCodes.Ok, await StatsCommand.RunAsync(CliTestKit.Target(path), json: false, console, TextWriter.Null, CancellationToken.None));
        var output = text.ToString();
        Assert.Matches(@"siblings\s+template\s+40", output);
        Assert.Matches(@"siblings\s+unlocated\s+2", output);
        Assert.Matches(@"siblings +3 +2026-12-02 04:30 +…[^\n]*question: \{question\}", output);
        Assert.All(output.Split('\n'), line => Assert.True(line.TrimEnd().Length <= 80, line));
    }

    [Fact]
    public async Task Stats_through_the_admin_API_equal_stats_of_the_same_store_file()
    {
        await using var proxy = await TestProxy.StartAsync(new Uri("http://127.0.0.1:9/v1/"), new Dictionary<string, string?> { ["Admin:Token"] = AdminToken });
        var store = proxy.Services.GetRequiredService<IRewriteStore>();
        await FillAsync(store);

        var remote = await StatsCommand.ReadAsync(new StatsTarget(null, proxy.Root, AdminToken), CancellationToken.None);
        var local = await StatsCommand.ReadAsync(CliTestKit.Target(proxy.Options.Store.Path), CancellationToken.None);

        Assert.True(JsonNode.DeepEquals(local["lanes"], remote["lanes"]), $"{local["lanes"]}\n---\n{remote["lanes"]}");
    }

    [Fact]
    public async Task Stats_with_a_wrong_token_fail_with_the_proxys_message()
    {
        await using var proxy = await TestProxy.StartAsync(new Uri("http://127.0.0.1:9/v1/"), new Dictionary<string, string?> { ["Admin:Token"] = AdminToken });
        var error = new StringWriter();
        var before = Console.Error;
        Console.SetError(error);
        try
        {
            var (console, _) = CliTestKit.Console80();
            var code = await StatsCommand.RunAsync(new StatsTarget(null, proxy.Root, "not-the-token-at-all"), false, console, TextWriter.Null, CancellationToken.None);
            Assert.Equal(ExitCodes.Failed, code);
        }
        finally
        {
            Console.SetError(before);
        }
        Assert.Contains("401", error.ToString());
    }
}
