using Microsoft.Extensions.Logging.Abstractions;
using RewriteProxy.Hosting;
using RewriteProxy.Store;

namespace RewriteProxy.Cli;

/// <summary>The store as the CLI opens it (stats, tune, purge): through <see cref="StoreFactory"/>, whatever the provider.</summary>
public static class CliStore
{
    /// <summary>
    /// Opens the configured store: <see cref="StoreAccess.ReadOnly"/> to read (never creates or migrates anything), or
    /// read-write to purge. Limits far above any real store, so that opening it never evicts or expires anything on
    /// its own (not TimeSpan.MaxValue: a sweep subtracts the TTL from now).
    /// </summary>
    /// <exception cref="StoreException">the store cannot be opened (a read-only open of a store that is not there included).</exception>
    public static async Task<IRewriteStore> OpenAsync(StoreOptions options, StoreAccess access, CancellationToken cancel)
    {
        var forever = TimeSpan.FromDays(100 * 365);
        IRewriteStore store;
        try
        {
            store = StoreFactory.Create(options with { MaxEntries = long.MaxValue, Ttl = forever },
                new EventsOptions { MaxRows = long.MaxValue, Retention = forever }, NullLoggerFactory.Instance);
        }
        catch (StartupException e)
        {
            throw new StoreException(e.Message, e);
        }
        try
        {
            await store.OpenAsync(access, cancel);
            return store;
        }
        catch
        {
            await store.DisposeAsync();
            throw;
        }
    }
}
