using Microsoft.Extensions.Configuration;
using Microsoft.Extensions.Logging.Abstractions;
using RewriteProxy.Cache;
using RewriteProxy.Cli;
using RewriteProxy.Hosting;
using RewriteProxy.Store;
using Spectre.Console;

namespace RewriteProxy.Tests.Cli;

/// <summary>Shared bits of the CLI tests: a captured 80-column console, a scratch folder, real stores, one-line configs.</summary>
static class CliTestKit
{
    public static string NewFolder()
    {
        var dir = Path.Combine(Path.GetTempPath(), "rewriteproxy-tests", "cli-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(dir);
        return dir;
    }

    /// <summary>A plain-text console 80 columns wide, the width the tables must be readable in.</summary>
    public static (IAnsiConsole Console, StringWriter Text) Console80()
    {
        var text = new StringWriter();
        var console = AnsiConsole.Create(new AnsiConsoleSettings
        {
            Ansi = AnsiSupport.No,
            ColorSystem = ColorSystemSupport.NoColors,
            Interactive = InteractionSupport.No,
            Out = new AnsiConsoleOutput(text),
        });
        console.Profile.Width = 80;
        return (console, text);
    }

    public static RewriteProxyOptions Options(string storePath)
    {
        var (options, errors) = OptionsReader.Read(new ConfigurationBuilder()
            .AddInMemoryCollection(new Dictionary<string, string?>
            {
                ["Upstream:BaseUrl"] = "http://127.0.0.1:9/v1",
                ["Store:Path"] = storePath,
                ["Lanes:siblings:Kind"] = "siblings",
                ["Lanes:siblings:MaxDrift"] = "0.65",
                ["Lanes:draft:Kind"] = "draft",
            }).Build());
        return options ?? throw new InvalidOperationException(string.Join("\n", errors));
    }

    /// <summary>A real store, opened (migrations applied) with limits that never evict or expire during a test.</summary>
    public static async Task<IRewriteStore> OpenStoreAsync(string path)
    {
        var store = StoreFactory.Create(new StoreOptions { Path = path, Ttl = TimeSpan.FromDays(3650) },
            new EventsOptions { Retention = TimeSpan.FromDays(3650) }, NullLoggerFactory.Instance);
        await store.OpenAsync(StoreAccess.ReadWrite, CancellationToken.None);
        return store;
    }

    /// <summary>The stats and purge target of a store file (what --store gives).</summary>
    public static StatsTarget Target(string path) => new(new StoreOptions { Path = path }, null, null);

    public static NewEntry Entry(string lane, string question, string partition = "p-larkmoor", DateTimeOffset? created = null,
        int promptTokens = 30, int completionTokens = 70) =>
        new($"scope-{lane}", partition, lane, question, QuestionText.Normalize(question), [1f, 0f, 0f], "test-model",
            "Call the emergency line.", new EntryScores(0.3, 0, [0.3]), "gpt-test", promptTokens, completionTokens,
            created ?? DateTimeOffset.UtcNow);
}
