using System.Buffers.Binary;
using System.Security.Cryptography;
using System.Text;
using Microsoft.Extensions.Logging.Abstractions;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// Index snapshots through the proxy's life: saved beside the store when the proxy stops, loaded at the next start and
/// caught up from the store by change sequence; a snapshot that must not be trusted is named in the log with its
/// reason, and the index is rebuilt from the store, so semantic hits work either way.
/// </summary>
public sealed class IndexSnapshotStartTests : UpstreamAndProxy
{
    const string Question = "How do I reset the PIN of my library card?";
    const string Paraphrase = "How can I reset my library card PIN?";
    const string Other = "When does the swimming pool open on Sundays?";
    const string OtherParaphrase = "On Sundays, when does the swimming pool open?";

    protected override bool StartsProxy => false;

    protected override void Script(ScriptedUpstream upstream) => upstream.Completion = ScriptedUpstream.DraftAnswer;

    readonly string _storePath = TestProxy.NewStorePath();

    string SnapshotPath => _storePath + ".index";

    Task<TestProxy> StartAsync(LogCapture? logs = null, bool snapshots = true, string? interval = null) => StartProxyAsync(new Dictionary<string, string?>
    {
        ["Store:Path"] = _storePath,
        ["Store:IndexSnapshotPath"] = snapshots ? null : "",
        ["Store:IndexSnapshotInterval"] = interval,
        ["Lanes:draft:MaxDrift"] = "0.9",
        ["Logging:LogLevel:cache"] = "Information",
    }, logs is null ? null : logs.Register);

    /// <summary>What the cache would answer, asked without letting it call upstream or store (only-if-cached).</summary>
    static async Task<string> ProbeAsync(TestProxy proxy, string question) =>
        (await proxy.AskAsync("draft", question, cacheControl: "only-if-cached")).Cache;

    /// <summary>A proxy that stores one entry, then stops gracefully: the stop saves the snapshot.</summary>
    async Task SaveOneEntryAsync()
    {
        await using var proxy = await StartAsync();
        Assert.Equal("miss", (await proxy.AskAsync("draft", Question)).Cache);
        Assert.Equal("hit-semantic", await ProbeAsync(proxy, Paraphrase));
    }

    [Fact]
    public async Task A_restart_loads_the_index_from_its_snapshot_and_serves_semantic_hits_at_once()
    {
        await SaveOneEntryAsync();
        Assert.True(File.Exists(SnapshotPath), "no snapshot beside the store after a graceful stop");
        var logs = new LogCapture();

        await using var proxy = await StartAsync(logs);

        Assert.Equal("hit-semantic", await ProbeAsync(proxy, Paraphrase));
        Assert.True(logs.Contains("index loaded from snapshot"), string.Join("\n", logs.Lines));
        Assert.False(logs.Contains("index rebuilt"), string.Join("\n", logs.Lines));
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task What_changed_in_the_store_since_the_snapshot_is_caught_up_by_change_sequence()
    {
        await SaveOneEntryAsync();
        // While this process is down, the store changes: one entry purged, another stored (by a proxy that saves no snapshot).
        await using (var store = StoreFactory.Create(new StoreOptions { Path = _storePath }, new EventsOptions(), NullLoggerFactory.Instance))
        {
            await store.OpenAsync(StoreAccess.ReadWrite, CancellationToken.None);
            var purged = await store.PurgeAsync(new PurgeFilter(Lane: "draft"), CancellationToken.None);
            Assert.Single(purged);
        }
        await using (var writer = await StartAsync(snapshots: false))
            Assert.Equal("miss", (await writer.AskAsync("draft", Other)).Cache);
        var logs = new LogCapture();

        await using var proxy = await StartAsync(logs);

        Assert.True(logs.Contains("index loaded from snapshot"), string.Join("\n", logs.Lines));
        Assert.Equal("hit-semantic", await ProbeAsync(proxy, OtherParaphrase));
        Assert.Equal("probe-miss", await ProbeAsync(proxy, Paraphrase));
    }

    [Fact]
    public async Task The_index_is_saved_every_interval_when_it_changed_and_only_then()
    {
        await SaveOneEntryAsync();
        var logs = new LogCapture();
        await using var proxy = await StartAsync(logs, interval: "1s");
        int Saves() => logs.Lines.Count(l => l.Contains("index snapshot saved (interval)", StringComparison.Ordinal));

        Assert.Equal("miss", (await proxy.AskAsync("draft", "Where can I park my bike at the library?")).Cache);
        await WaitForAsync(() => Saves() == 1, TimeSpan.FromSeconds(10));
        await Task.Delay(TimeSpan.FromSeconds(2.5)); // two more intervals, nothing changed
        var unchanged = Saves();
        Assert.Equal("miss", (await proxy.AskAsync("draft", Other)).Cache);
        await WaitForAsync(() => Saves() == 2, TimeSpan.FromSeconds(10));

        Assert.Equal(1, unchanged);
        Assert.Equal(2, Saves());
    }

    static async Task WaitForAsync(Func<bool> condition, TimeSpan limit)
    {
        var deadline = DateTime.UtcNow + limit;
        while (!condition() && DateTime.UtcNow < deadline) await Task.Delay(50);
    }

    [Fact]
    public async Task With_snapshots_off_nothing_is_saved()
    {
        await using (var proxy = await StartAsync(snapshots: false))
            Assert.Equal("miss", (await proxy.AskAsync("draft", Question)).Cache);

        Assert.False(File.Exists(SnapshotPath));
    }

    /// <summary>The untrusted snapshots: each damage, and the reason the proxy must give for it.</summary>
    public static TheoryData<string, string> Damages => new()
    {
        { "model", "other_model" },
        { "dimensions", "other_dimensions" },
        { "store", "other_store" },
        { "format", "newer_format" },
        { "bit", "bad_checksum" },
        { "cut", "truncated" },
        { "sequence", "changes_gone" },
        { "garbage", "not_a_snapshot" },
    };

    [Theory]
    [MemberData(nameof(Damages))]
    public async Task A_snapshot_that_must_not_be_trusted_is_named_in_the_log_and_the_index_is_rebuilt(string damage, string reason)
    {
        await SaveOneEntryAsync();
        Damage(SnapshotPath, damage);
        var logs = new LogCapture();

        await using var proxy = await StartAsync(logs);

        Assert.True(logs.Contains($"not used ({reason}:"), string.Join("\n", logs.Lines));
        Assert.True(logs.Contains("index rebuilt"), string.Join("\n", logs.Lines));
        Assert.False(logs.Contains("index loaded from snapshot"));
        Assert.Equal("hit-semantic", await ProbeAsync(proxy, Paraphrase));
    }

    /// <summary>
    /// Changes the file as its format (Cache/Snapshots/IndexSnapshotFormat) lays it out; for the damages that must get
    /// past the checksum to be seen, seals it again with a fresh SHA-256 over every byte before the last 32.
    /// </summary>
    static void Damage(string path, string damage)
    {
        var bytes = File.ReadAllBytes(path);
        var modelLength = BinaryPrimitives.ReadInt32LittleEndian(bytes.AsSpan(64));
        var storeAt = 64 + 4 + modelLength + 4;
        var reseal = true;
        switch (damage)
        {
            case "model": bytes[64 + 4] ^= 0x20; break;
            case "dimensions": BinaryPrimitives.WriteInt32LittleEndian(bytes.AsSpan(52), 768); break;
            case "store": bytes[storeAt] = bytes[storeAt] == (byte)'0' ? (byte)'1' : (byte)'0'; break;
            case "format": BinaryPrimitives.WriteInt32LittleEndian(bytes.AsSpan(8), 99); break;
            case "sequence": BinaryPrimitives.WriteInt64LittleEndian(bytes.AsSpan(28), 1_000_000_000); break;
            case "bit":
                bytes[bytes.Length / 2] ^= 0x01;
                reseal = false;
                break;
            case "cut":
                bytes = bytes[..(bytes.Length * 2 / 3)];
                reseal = false;
                break;
            case "garbage":
                bytes = Encoding.UTF8.GetBytes("not an index at all, but long enough to hold a header of sixty-four bytes and more");
                reseal = false;
                break;
        }
        if (reseal) SHA256.HashData(bytes.AsSpan(0, bytes.Length - 32)).CopyTo(bytes.AsSpan(bytes.Length - 32));
        File.WriteAllBytes(path, bytes);
    }
}
