using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Store.Sqlite;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>Entries across restarts, expiry, eviction, and the store failing under a running proxy.</summary>
public sealed class LaneStoreTests : UpstreamAndProxy
{
    protected override bool StartsProxy => false;

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    Task<TestProxy> StartAsync(string storePath, params (string Key, string Value)[] settings)
    {
        var all = new Dictionary<string, string?> { ["Store:Path"] = storePath, ["Lanes:draft:MaxDrift"] = "0.9" };
        foreach (var (k, v) in settings) all[k] = v;
        return StartProxyAsync(all);
    }

    static async Task FlushAsync(TestProxy proxy) =>
        await proxy.Services.GetRequiredService<IRewriteStore>().FlushAsync(CancellationToken.None);

    /// <summary>Waits (at most 10 s) until the store was made anew: a new store has a new id.</summary>
    static async Task MadeAnewAsync(IRewriteStore store, string before)
    {
        var waited = System.Diagnostics.Stopwatch.StartNew();
        while (store.StoreId == before && waited.Elapsed < TimeSpan.FromSeconds(10)) await Task.Delay(20);
        Assert.NotEqual(before, store.StoreId);
    }

    [Fact]
    public async Task Entries_survive_a_restart_and_the_index_is_rebuilt()
    {
        var path = TestProxy.NewStorePath();
        await using (var first = await StartAsync(path))
        {
            Assert.Equal("miss", (await first.AskAsync("draft", "How do I reset the PIN of my library card?")).Cache);
        }
        await using var second = await StartAsync(path);

        Assert.Equal("hit-exact", (await second.AskAsync("draft", "How do I reset the PIN of my library card?")).Cache);
        Assert.Equal("hit-semantic", (await second.AskAsync("draft", "How can I reset my library card PIN?")).Cache);
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Expired_entries_are_not_served()
    {
        await using var proxy = await StartAsync(TestProxy.NewStorePath(), ("Store:Ttl", "1s"));
        await proxy.AskAsync("draft", "When does the swimming pool close?");
        await Task.Delay(1200);

        Assert.Equal("miss", (await proxy.AskAsync("draft", "When does the swimming pool close?")).Cache);
        Assert.Equal(2, Upstream.ChatCalls);
    }

    [Fact]
    public async Task The_least_recently_hit_entries_are_evicted_beyond_max_entries()
    {
        await using var proxy = await StartAsync(TestProxy.NewStorePath(), ("Store:MaxEntries", "3"));
        string[] q =
        [
            "Where is the lost property office?", "How much is a monthly parking permit?", "Who signs the school trip forms?",
            "When is bulky waste collected?", "How do I book a tennis court?",
        ];
        foreach (var question in q[..3]) await proxy.AskAsync("draft", question);
        Assert.Equal("hit-exact", (await proxy.AskAsync("draft", q[0])).Cache); // q[0] is now the most recently hit
        await FlushAsync(proxy);
        foreach (var question in q[3..]) await proxy.AskAsync("draft", question);
        await FlushAsync(proxy);

        var stats = await proxy.Services.GetRequiredService<IRewriteStore>().StatsAsync(CancellationToken.None);
        Assert.Equal(3, stats.Lanes.Single(l => l.Lane == "draft").Entries);
        Assert.Equal("hit-exact", (await proxy.AskAsync("draft", q[0])).Cache);
        Assert.Equal("hit-exact", (await proxy.AskAsync("draft", q[4])).Cache);
        Assert.Equal("miss", (await proxy.AskAsync("draft", q[1])).Cache);
    }

    [Fact]
    public async Task A_deleted_store_file_fails_open_and_the_store_starts_anew()
    {
        var path = TestProxy.NewStorePath();
        await using var proxy = await StartAsync(path);
        await proxy.AskAsync("draft", "How many guests may a member bring?");
        await FlushAsync(proxy);
        var store = proxy.Services.GetRequiredService<IRewriteStore>();
        var before = store.StoreId;
        foreach (var suffix in new[] { "", "-wal", "-shm" }) File.Delete(path + suffix);

        var during = await proxy.AskAsync("draft", "How many guests may a member bring?");
        Assert.Equal(200, during.Status);
        Assert.Contains(during.Cache, new[] { "bypass", "miss" });

        await MadeAnewAsync(store, before);
        var stored = await proxy.AskAsync("draft", "Is there a locker room at the east gate?");
        var again = await proxy.AskAsync("draft", "Is there a locker room at the east gate?");
        Assert.Equal("miss", stored.Cache);
        Assert.Equal("hit-exact", again.Cache);
    }

    [Fact]
    public async Task A_corrupted_store_file_fails_open_and_is_moved_aside()
    {
        var path = TestProxy.NewStorePath();
        await using var proxy = await StartAsync(path);
        await proxy.AskAsync("draft", "Can I pay the library fine online?");
        await FlushAsync(proxy);
        var store = proxy.Services.GetRequiredService<IRewriteStore>();
        var before = store.StoreId;
        ((SqliteRewriteStore)store).ReleaseConnections();
        // Overwrite the SQLite header ("SQLite format 3\0", sqlite.org/fileformat.html §1.3) and the first pages.
        await using (var file = new FileStream(path, FileMode.Open, FileAccess.Write, FileShare.ReadWrite))
            file.Write(new byte[8192].Select((_, i) => (byte)(i * 7)).ToArray());
        foreach (var suffix in new[] { "-wal", "-shm" }) File.Delete(path + suffix);

        var during = await proxy.AskAsync("draft", "Can I pay the library fine online?");
        Assert.Equal(200, during.Status);
        Assert.Equal("answer", during.Content.Split(':')[0].Split(' ')[^1]);

        var dir = Path.GetDirectoryName(path)!;
        await MadeAnewAsync(store, before);
        Assert.NotEmpty(Directory.GetFiles(dir, "*.corrupt-*"));
        await proxy.AskAsync("draft", "Are e-books free for members?");
        Assert.Equal("hit-exact", (await proxy.AskAsync("draft", "Are e-books free for members?")).Cache);
    }

    [Fact]
    public async Task A_read_only_store_fails_open_and_the_proxy_keeps_serving()
    {
        var path = TestProxy.NewStorePath();
        await using var proxy = await StartAsync(path);
        await proxy.AskAsync("draft", "Where can I charge an e-bike?");
        await FlushAsync(proxy);
        // As root, file modes would not stop writes; the immutable attribute does.
        using var undo = FileFaults.MakeImmutable(path, path + "-wal", path + "-shm");

        var first = await proxy.AskAsync("draft", "Which trails allow horses?");
        var second = await proxy.AskAsync("draft", "Which trails allow horses?");
        Assert.Equal(200, first.Status);
        Assert.Equal(200, second.Status);
        Assert.NotEqual("hit-exact", second.Cache); // the first answer could not be stored
        Assert.Equal(3, Upstream.ChatCalls);
    }
}
