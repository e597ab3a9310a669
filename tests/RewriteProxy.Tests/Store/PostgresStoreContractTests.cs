using Npgsql;
using RewriteProxy.Store;
using RewriteProxy.Store.Postgres;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Store;

/// <summary>
/// The store contract on the PostgreSQL store: each place a new database on the throwaway cluster (Debian's
/// <c>postgresql</c> package, <see cref="PostgresCluster"/>), reached over TCP with the role's password.
/// </summary>
[Collection(PostgresCollection.Name)]
public sealed class PostgresStoreContractTests(PostgresCluster cluster) : StoreContract
{
    protected override StoreOptions NewPlace() => new()
    {
        Provider = StoreProvider.Postgres,
        // The suite's hook is synchronous; creating a database takes a few milliseconds. The contract is about what
        // the store does, not how fast: the request path's 2 s + 2 s bound (PostgresConnector) once cut a first write
        // short on a CI machine running the suite at a load average of 9, so these stores get 15 s each. The bound
        // itself is tested by PostgresFailOpenTests.
        ConnectionString = cluster.CreateDatabaseAsync().GetAwaiter().GetResult() + ";Timeout=15;Command Timeout=15",
    };

    /// <summary>Drops the store's schema (its tables, sequences and all) and gives the database an empty one.</summary>
    protected override async Task MakeAnewAsync(StoreOptions place)
    {
        await using var admin = await cluster.AdminAsync(Database(place));
        await using var command = new NpgsqlCommand(
            $"DROP SCHEMA public CASCADE; CREATE SCHEMA public AUTHORIZATION {PostgresCluster.Role};", admin);
        await command.ExecuteNonQueryAsync();
    }

    /// <summary>A store exists in the database once its schema does (the database itself is the test's, made empty).</summary>
    protected override async Task<bool> ExistsAsync(StoreOptions place)
    {
        await using var admin = await cluster.AdminAsync(Database(place));
        await using var command = new NpgsqlCommand(
            "SELECT count(*) FROM pg_tables WHERE schemaname = 'public'", admin);
        return (long)(await command.ExecuteScalarAsync())! > 0;
    }

    protected override Task SweepAsync(IRewriteStore store, TimeSpan keepChangesFor, long maxChangesKept) =>
        ((PostgresRewriteStore)store).SweepNowAsync(keepChangesFor, maxChangesKept, CancellationToken.None);

    static string Database(StoreOptions place) => new NpgsqlConnectionStringBuilder(place.ConnectionString).Database!;
}
