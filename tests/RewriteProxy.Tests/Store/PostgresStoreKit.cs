using Microsoft.Extensions.Logging;
using Microsoft.Extensions.Logging.Abstractions;
using Npgsql;
using RewriteProxy.Cache;
using RewriteProxy.Store;
using RewriteProxy.Store.Postgres;

namespace RewriteProxy.Tests.Store;

/// <summary>Stores on a test database, entries to put in them, and reading what the database holds.</summary>
public static class PostgresStoreKit
{
    public const int Dimensions = 384;

    public static async Task<PostgresRewriteStore> OpenAsync(string connectionString, StoreOptions? options = null, EventsOptions? events = null,
        ILogger? log = null, StoreAccess access = StoreAccess.ReadWrite)
    {
        var place = (options ?? new StoreOptions()) with { Provider = StoreProvider.Postgres, ConnectionString = connectionString };
        var store = new PostgresRewriteStore(place, events ?? new EventsOptions(), log ?? NullLogger.Instance);
        try
        {
            await store.OpenAsync(access, CancellationToken.None);
            return store;
        }
        catch
        {
            await store.DisposeAsync();
            throw;
        }
    }

    public static NewEntry Entry(string question, string scope = "scope-a", string lane = "draft", string partition = "partition-1",
        DateTimeOffset? created = null, float[]? vector = null, string content = "a draft", string? modelId = "model-1") =>
        new(scope, partition, lane, question, QuestionText.Normalize(question), vector ?? Vector(question.GetHashCode()), modelId, content,
            new EntryScores(0.12, 1, [0.12]), "gpt-test", 11, 22, created ?? Now());

    /// <summary>Now, to the millisecond (what the stores keep).</summary>
    public static DateTimeOffset Now() => DateTimeOffset.FromUnixTimeMilliseconds(DateTimeOffset.UtcNow.ToUnixTimeMilliseconds());

    public static float[] Vector(int seed)
    {
        var random = new Random(seed);
        var v = new float[Dimensions];
        for (var i = 0; i < v.Length; i++) v[i] = (float)(random.NextDouble() * 2 - 1);
        return v;
    }

    public static async Task<T> ScalarAsync<T>(string connectionString, string sql)
    {
        await using var c = new NpgsqlConnection(connectionString);
        await c.OpenAsync();
        await using var command = new NpgsqlCommand(sql, c);
        return (T)(await command.ExecuteScalarAsync())!;
    }

    /// <summary>Waits until <paramref name="condition"/> holds, polling; false when it did not within <paramref name="within"/>.</summary>
    public static async Task<bool> EventuallyAsync(Func<Task<bool>> condition, TimeSpan within)
    {
        var deadline = DateTime.UtcNow + within;
        while (DateTime.UtcNow < deadline)
        {
            if (await condition()) return true;
            await Task.Delay(50);
        }
        return await condition();
    }
}
