using System.Collections.Concurrent;
using System.Text.Json;
using Microsoft.Data.Sqlite;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// kill -9 of the real proxy process while lane misses are in flight. SQLite in WAL mode promises that a committed
/// transaction survives an application crash and that an uncommitted one leaves no trace (sqlite.org/wal.html,
/// sqlite.org/atomiccommit.html); the proxy answers a miss only after its entry committed (RewriteFlow.CommitWait).
/// So after the crash: the file passes PRAGMA integrity_check, and every answer a client received is in the store,
/// whole, with exactly the content the client saw.
/// </summary>
public sealed class CrashSafetyTests : UpstreamAndProxy
{
    /// <summary>Each test starts the proxy it needs.</summary>
    protected override bool StartsProxy => false;

    const int Questions = 100;
    const int Concurrency = 8;
    /// <summary>Kill once about half the answers have arrived: the rest are in flight or not yet sent.</summary>
    const int KillAfter = 50;
    /// <summary>all-MiniLM-L6-v2 vectors: 384 float32 values (the model card on huggingface.co).</summary>
    const int VectorBytes = 384 * sizeof(float);

    [Fact]
    public async Task Kill_9_during_lane_misses_leaves_an_intact_store_holding_every_answered_entry()
    {
        // Each answer is long and distinct so a half-written or mixed-up entry would show.
        Upstream.Completion = r => ScriptedUpstream.DraftAnswer(r) + " " + string.Join(' ', Enumerable.Repeat("detail", 200));
        Upstream.Delay = TimeSpan.FromMilliseconds(30);
        var storePath = TestProxy.NewStorePath();
        var settings = new Dictionary<string, string> { ["Lanes:draft:MaxDrift"] = "2", ["Logging:LogLevel:Default"] = "Warning" };

        var answered = new ConcurrentDictionary<string, string>();
        var failures = 0;
        await using (var proxy = await ProxyProcess.StartAsync(Upstream.BaseUrl, storePath, settings))
        {
            using var gate = new SemaphoreSlim(Concurrency);
            var killed = 0;
            var calls = Enumerable.Range(0, Questions).Select(async i =>
            {
                await gate.WaitAsync();
                try
                {
                    var q = $"What are the opening hours of branch library number {i} on weekdays?";
                    var reply = await proxy.Client.AskAsync("draft", q);
                    if (reply.Status == 200) answered[q] = reply.Content;
                    if (answered.Count >= KillAfter && Interlocked.Exchange(ref killed, 1) == 0) proxy.Kill();
                }
                catch (HttpRequestException)
                {
                    Interlocked.Increment(ref failures); // in flight when the process died
                }
                finally
                {
                    gate.Release();
                }
            }).ToList();
            await Task.WhenAll(calls);
            Assert.True(proxy.HasExited);
        }
        Assert.InRange(answered.Count, KillAfter, Questions - 1);
        Assert.True(failures > 0, "no call was in flight at the kill");

        // Restart on the same file: it opens (the proxy runs quick_check at start) and serves what was answered.
        await using (var restarted = await ProxyProcess.StartAsync(Upstream.BaseUrl, storePath, settings))
        {
            var (question, content) = answered.First();
            var hit = await restarted.Client.AskAsync("draft", question);
            Assert.Equal("hit-exact", hit.Cache);
            Assert.Equal(content, hit.Content);
            restarted.Kill();
        }

        using var db = new SqliteConnection(new SqliteConnectionStringBuilder { DataSource = storePath, Pooling = false }.ToString());
        db.Open();
        // sqlite.org/pragma.html#pragma_integrity_check: a single row "ok" when no problem is found.
        Assert.Equal("ok", Scalar(db, "PRAGMA integrity_check;"));

        var stored = new Dictionary<string, (string Content, string Scores, byte[]? Vector)>();
        using (var cmd = db.CreateCommand())
        {
            cmd.CommandText = "SELECT question, content, scores, vector FROM entries";
            using var reader = cmd.ExecuteReader();
            while (reader.Read())
                stored[reader.GetString(0)] = (reader.GetString(1), reader.GetString(2), reader.IsDBNull(3) ? null : (byte[])reader[3]);
        }
        foreach (var (question, content) in answered)
        {
            Assert.True(stored.TryGetValue(question, out var entry), $"answered but not stored: {question}");
            Assert.Equal(content, entry.Content);
        }
        foreach (var (question, entry) in stored)
        {
            Assert.False(string.IsNullOrEmpty(entry.Content), $"empty content for {question}");
            using var scores = JsonDocument.Parse(entry.Scores); // throws on a half-written value
            Assert.Equal(JsonValueKind.Object, scores.RootElement.ValueKind);
            Assert.Equal(VectorBytes, entry.Vector?.Length);
        }
    }

    static string? Scalar(SqliteConnection db, string sql)
    {
        using var cmd = db.CreateCommand();
        cmd.CommandText = sql;
        return cmd.ExecuteScalar() as string;
    }
}
