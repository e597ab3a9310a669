using Microsoft.Extensions.Logging;

namespace RewriteProxy.Store.Postgres;

/// <summary>
/// The shared store: several proxy replicas use one PostgreSQL database. Entries are written at once (a miss waits
/// for its commit); hits, tallies, events and templates go through a background writer in batches. Every entry
/// stored or deleted writes a change in commit order and a notification, which each replica's index follows. Calls
/// fail fast with <see cref="StoreException"/> while the database is unreachable (<see cref="PostgresCircuit"/>),
/// and work again when it is back.
/// </summary>
public sealed partial class PostgresRewriteStore : IRewriteStore
{
    readonly PostgresConnector _connector;
    readonly StoreOptions _options;
    readonly EventsOptions _events;
    readonly ILogger _log;
    /// <summary>Who holds a claim: this store instance (a random id, with the host for an operator reading the table).</summary>
    readonly string _holder = $"{Environment.MachineName}:{Environment.ProcessId}:{Guid.NewGuid().ToString("N")[..16]}";
    PostgresWriter? _writer;
    PostgresListener? _listener;
    StoreAccess? _access;
    string? _storeId;
    int _disposed;

    /// <summary>
    /// A store on the database of <see cref="StoreOptions.ConnectionString"/> (Npgsql's format; its <c>Timeout</c>,
    /// <c>Command Timeout</c> and <c>Cancellation Timeout</c> default to <see cref="PostgresConnector"/>'s small values
    /// when absent), not yet opened.
    /// </summary>
    /// <exception cref="ArgumentException">the connection string is missing or cannot be read.</exception>
    public PostgresRewriteStore(StoreOptions options, EventsOptions events, ILogger logger)
    {
        _connector = new PostgresConnector(options.ConnectionString ?? throw new ArgumentException("Store:ConnectionString is missing"));
        _options = options;
        _events = events;
        _log = logger;
    }

    public string Location => _connector.Location;

    public string StoreId => _storeId ?? throw new StoreException($"{Location}: the store is not open");

    /// <summary>Hit counts, tallies, events and templates dropped because the writer's queue was full.</summary>
    public long DroppedWrites => _writer?.Dropped ?? 0;

    /// <summary>Whether the change listener is connected now (tests wait for it).</summary>
    internal bool Listening => _listener?.Connected ?? false;

    public event Action? ChangesAvailable;

    public async Task OpenAsync(StoreAccess access, CancellationToken cancel)
    {
        if (_access is not null) throw new InvalidOperationException($"{Location}: the store is already open");
        _storeId = await _connector.RunStartupAsync("opening the store", c => access == StoreAccess.ReadWrite
            ? PostgresMigrations.MigrateAsync(c, _log, Location, cancel)
            : PostgresMigrations.CheckAsync(c, Location, cancel), cancel);
        _access = access;
        if (access == StoreAccess.ReadOnly) return;
        _writer = new PostgresWriter(_connector, _log, Sweep);
        _listener = new PostgresListener(_connector, RaiseChangesAvailable, _log);
    }

    /// <summary>Raised after this store's commits of changes and on every notification; a handler's failure is logged, never thrown into the store.</summary>
    void RaiseChangesAvailable()
    {
        try
        {
            ChangesAvailable?.Invoke();
        }
        catch (Exception e)
        {
            _log.LogError(e, "store: a ChangesAvailable handler failed");
        }
    }

    void EnsureOpen()
    {
        if (_access is null) throw new StoreException($"{Location}: the store is not open");
    }

    void EnsureWritable()
    {
        EnsureOpen();
        if (_access != StoreAccess.ReadWrite) throw new StoreException($"{Location}: the store was opened read-only");
    }

    /// <summary>Stops the listener, writes what is queued (for at most a few seconds), and closes the pool; once.</summary>
    public async ValueTask DisposeAsync()
    {
        if (Interlocked.Exchange(ref _disposed, 1) == 1) return;
        if (_listener is not null) await _listener.DisposeAsync();
        if (_writer is not null) await _writer.DisposeAsync();
        await _connector.DisposeAsync();
    }
}
