using System.Diagnostics;
using System.Net.Http.Headers;
using System.Text;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Replicas;

/// <summary>
/// Three real proxy processes on one PostgreSQL database of the throwaway cluster, in front of one scripted upstream:
/// replicas as a load balancer would see them. Each is a child process, so one can be killed with SIGKILL.
/// </summary>
public sealed class ReplicaSet : IAsyncDisposable
{
    public const string AdminToken = "replica-admin-token-0123456789";

    readonly List<ProxyProcess> _replicas;

    ReplicaSet(List<ProxyProcess> replicas, string connectionString)
    {
        _replicas = replicas;
        ConnectionString = connectionString;
    }

    /// <summary>The replicas' shared database.</summary>
    public string ConnectionString { get; }

    public ProxyProcess this[int i] => _replicas[i];

    public IReadOnlyList<ProxyProcess> All => _replicas;

    /// <summary>Starts <paramref name="count"/> replicas at once on a fresh database: their migrations race, as in a deploy.</summary>
    public static async Task<ReplicaSet> StartAsync(PostgresCluster cluster, ScriptedUpstream upstream, int count = 3,
        IDictionary<string, string>? settings = null)
    {
        var connectionString = await cluster.CreateDatabaseAsync();
        var all = new Dictionary<string, string>
        {
            ["Store:Provider"] = "postgres",
            ["Store:ConnectionString"] = connectionString,
            ["Store:IndexSnapshotPath"] = "",
            ["Admin:Token"] = AdminToken,
            // Every draft is accepted: these tests are about sharing entries, not judging them.
            ["Lanes:draft:MaxDrift"] = "2",
            ["Logging:LogLevel:Default"] = "Warning",
        };
        foreach (var (k, v) in settings ?? new Dictionary<string, string>()) all[k] = v;
        var started = await Task.WhenAll(Enumerable.Range(0, count)
            .Select(_ => ProxyProcess.StartAsync(upstream.BaseUrl, TestProxy.NewStorePath(), all)));
        return new ReplicaSet([.. started], connectionString);
    }

    /// <summary>Purges through one replica's admin API, as an operator would.</summary>
    public static async Task<string> PurgeAsync(ProxyProcess replica, string json)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, "/admin/purge")
        {
            Content = new StringContent(json, Encoding.UTF8, "application/json"),
        };
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", AdminToken);
        using var response = await replica.Client.SendAsync(request);
        var body = await response.Content.ReadAsStringAsync();
        Assert.True(response.IsSuccessStatusCode, $"purge answered {(int)response.StatusCode}: {body}");
        return body;
    }

    /// <summary>
    /// Asks with <c>Cache-Control: only-if-cached</c> (a probe: never upstream, never stored) until the answer is what
    /// <paramref name="wanted"/> accepts or <paramref name="within"/> runs out; the time it took, or null.
    /// </summary>
    public static async Task<TimeSpan?> ProbeUntilAsync(ProxyProcess replica, string question, Func<LaneReply, bool> wanted, TimeSpan within,
        string credential = "sk-tenant-a")
    {
        var watch = Stopwatch.StartNew();
        while (watch.Elapsed < within)
        {
            var reply = await replica.Client.AskAsync("draft", question, credential, cacheControl: "only-if-cached");
            if (wanted(reply)) return watch.Elapsed;
            await Task.Delay(20);
        }
        return null;
    }

    public async ValueTask DisposeAsync()
    {
        foreach (var replica in _replicas) await replica.DisposeAsync();
    }
}
