using RewriteProxy.Store;
using RewriteProxy.Store.Sqlite;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Store;

/// <summary>The store contract on the embedded SQLite store: each place a file in a folder of its own.</summary>
public sealed class SqliteStoreContractTests : StoreContract
{
    readonly List<string> _folders = [];

    protected override StoreOptions NewPlace()
    {
        var path = TestProxy.NewStorePath();
        _folders.Add(Path.GetDirectoryName(path)!);
        return new StoreOptions { Path = path };
    }

    protected override Task MakeAnewAsync(StoreOptions place)
    {
        foreach (var suffix in new[] { "", "-wal", "-shm" }) File.Delete(place.Path + suffix);
        return Task.CompletedTask;
    }

    protected override Task<bool> ExistsAsync(StoreOptions place) => Task.FromResult(File.Exists(place.Path));

    protected override Task SweepAsync(IRewriteStore store, TimeSpan keepChangesFor, long maxChangesKept) =>
        ((SqliteRewriteStore)store).SweepNowAsync(keepChangesFor, maxChangesKept);

    public override async Task DisposeAsync()
    {
        await base.DisposeAsync();
        foreach (var folder in _folders.Where(Directory.Exists)) Directory.Delete(folder, recursive: true);
    }
}
