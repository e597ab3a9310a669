using Microsoft.Extensions.Logging;
using RewriteProxy.Store.Postgres;
using RewriteProxy.Store.Sqlite;

namespace RewriteProxy.Store;

/// <summary>
/// The one place that maps <c>Store:Provider</c> to an implementation of <see cref="IRewriteStore"/>, and checks the
/// settings that provider needs. Everything else holds an <see cref="IRewriteStore"/> and never asks which it is.
/// </summary>
public static class StoreFactory
{
    /// <summary>What is wrong with the store settings, one line per problem naming the key (empty when they can be used).</summary>
    public static IEnumerable<string> Problems(StoreOptions options)
    {
        if (options.Provider == StoreProvider.Postgres && string.IsNullOrWhiteSpace(options.ConnectionString))
            yield return "Store:ConnectionString is missing; Store:Provider = postgres needs the database in Npgsql's format, " +
                "e.g. Host=db;Username=rewriteproxy;Password=...;Database=rewriteproxy (environment: REWRITEPROXY_Store__ConnectionString)";
        else if (options.Provider == StoreProvider.Postgres && PostgresConnector.Problem(options.ConnectionString!) is { } problem)
            yield return $"Store:ConnectionString: {problem}";
        if (options.Provider == StoreProvider.Sqlite && string.IsNullOrWhiteSpace(options.Path))
            yield return "Store:Path is empty; Store:Provider = sqlite needs the file of the store";
    }

    /// <summary>The setting that says where the store is, for start-up errors.</summary>
    public static string WhereKey(StoreOptions options) =>
        options.Provider == StoreProvider.Sqlite ? "Store:Path" : "Store:ConnectionString";

    /// <summary>The store the settings name, for a person and never with a secret: the file's path, or the provider's name.</summary>
    public static string Describe(StoreOptions options) =>
        options.Provider == StoreProvider.Sqlite ? options.Path : "postgres (Store:ConnectionString)";

    /// <summary>A store of the configured provider, not yet opened (see <see cref="IRewriteStore.OpenAsync"/>).</summary>
    /// <exception cref="ArgumentException">the settings cannot be used (<see cref="Problems"/> reports them at start).</exception>
    public static IRewriteStore Create(StoreOptions options, EventsOptions events, ILoggerFactory logs) => options.Provider switch
    {
        StoreProvider.Sqlite => new SqliteRewriteStore(options, events, logs.CreateLogger("store")),
        StoreProvider.Postgres => new PostgresRewriteStore(options, events, logs.CreateLogger("store")),
        _ => throw new ArgumentOutOfRangeException(nameof(options), options.Provider, "unknown Store:Provider"),
    };
}
