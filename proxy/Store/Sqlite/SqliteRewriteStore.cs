using System.Collections.Concurrent;
using System.Threading.Channels;
using Dapper;
using Microsoft.Data.Sqlite;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Store.Sqlite;

/// <summary>
/// The embedded store: one SQLite file in WAL mode, used by one process. Reads run on pooled connections; every write
/// goes through one background writer that commits in batches, so requests never wait on each other's writes.
/// Its parts: this file (opening, the queued operations), <c>.Reads</c>, <c>.Writes</c> (the writer's batches and sweep),
/// <c>.Recovery</c> (a file deleted or damaged under us).
/// </summary>
public sealed partial class SqliteRewriteStore : IRewriteStore
{
    /// <summary>Most operations waiting for the writer; beyond it hit counts and events are dropped (counted), never requests.</summary>
    const int QueueCapacity = 16_384;

    readonly StoreOptions _options;
    readonly EventsOptions _events;
    readonly ILogger _log;
    readonly string _connectionString;
    /// <summary>Reads never create the file: a store deleted under us must not silently reappear empty from a read.</summary>
    string _readConnectionString;
    readonly Channel<WriteOp> _queue = Channel.CreateBounded<WriteOp>(new BoundedChannelOptions(QueueCapacity)
    {
        SingleReader = true,
        FullMode = BoundedChannelFullMode.Wait,
    });
    Task? _writer;
    StoreAccess? _access;
    long _entryCount;
    /// <summary>Opened read-only: background writes (hits, tallies, events, templates) are dropped, nothing is queued.</summary>
    bool ReadOnly => _access == StoreAccess.ReadOnly;
    long _eventCount;

    /// <summary>Raised after each commit that wrote changes (on the writer's thread).</summary>
    public event Action? ChangesAvailable;

    /// <summary>Operations dropped because the queue was full (hit counts, events).</summary>
    public long DroppedWrites;

    public string FilePath { get; }

    public string Location => "sqlite " + FilePath;

    public string StoreId { get; private set; } = "";

    public SqliteRewriteStore(StoreOptions options, EventsOptions events, ILogger logger)
    {
        _options = options;
        _events = events;
        _log = logger;
        FilePath = Path.GetFullPath(options.Path);
        _connectionString = new SqliteConnectionStringBuilder
        {
            DataSource = FilePath,
            Mode = SqliteOpenMode.ReadWriteCreate,
            Cache = SqliteCacheMode.Private,
            Pooling = true,
            DefaultTimeout = 5,
        }.ToString();
        _readConnectionString = new SqliteConnectionStringBuilder(_connectionString) { Mode = SqliteOpenMode.ReadWrite }.ToString();
    }

    public Task OpenAsync(StoreAccess access, CancellationToken cancel)
    {
        // Start-up work (migrations, an integrity check), never on the request path.
        cancel.ThrowIfCancellationRequested();
        if (access == StoreAccess.ReadOnly) OpenReadOnly();
        else Open();
        return Task.CompletedTask;
    }

    /// <summary>Creates the file if needed, applies the migrations, checks integrity, starts the writer.</summary>
    void Open()
    {
        Guard(() =>
        {
            CreateFilePrivately();
            using var c = Connect();
            c.Execute("PRAGMA journal_mode=WAL;");
            var version = SchemaVersion(c);
            for (var step = (int)version; step < SqliteMigrations.Steps.Length; step++)
            {
                using var tx = c.BeginTransaction();
                c.Execute(SqliteMigrations.Steps[step], transaction: tx);
                c.Execute($"PRAGMA user_version = {step + 1};", transaction: tx);
                tx.Commit();
                _log.LogInformation("store: applied migration {Step}", step + 1);
            }
            var check = c.ExecuteScalar<string>("PRAGMA quick_check;");
            if (check != "ok") throw new StoreException($"{FilePath}: the database is damaged ({check})");
            StoreId = c.ExecuteScalar<string>("SELECT value FROM meta WHERE key = 'store_id'") ?? "";
            _entryCount = c.ExecuteScalar<long>("SELECT COUNT(*) FROM entries;");
            _eventCount = c.ExecuteScalar<long>("SELECT COUNT(*) FROM events;");
        });
        _access = StoreAccess.ReadWrite;
        _writer ??= Task.Run(WriteLoopAsync);
    }

    /// <summary>Opens an existing file for reading only: never creates, migrates or writes (the CLI on a live store).</summary>
    void OpenReadOnly()
    {
        if (!File.Exists(FilePath))
            throw new StoreException($"{FilePath}: no store there; nothing was created (check Store:Path, or --store)");
        _readConnectionString = new SqliteConnectionStringBuilder(_connectionString) { Mode = SqliteOpenMode.ReadOnly }.ToString();
        Guard(() =>
        {
            using var c = Connect(create: false);
            var version = SchemaVersion(c);
            // A store not yet migrated by this version still reads (stats, events); it has no identity until it is.
            StoreId = version >= SqliteMigrations.MetaStep
                ? c.ExecuteScalar<string>("SELECT value FROM meta WHERE key = 'store_id'") ?? ""
                : "";
        });
        _access = StoreAccess.ReadOnly;
    }

    long SchemaVersion(SqliteConnection c)
    {
        var version = c.ExecuteScalar<long>("PRAGMA user_version;");
        if (version > SqliteMigrations.Steps.Length)
            throw new StoreException($"{FilePath}: the store has schema version {version}, newer than this build's " +
                $"{SqliteMigrations.Steps.Length}; run the newer rewriteproxy on it");
        return version;
    }

    void Guard(Action open)
    {
        try
        {
            open();
        }
        catch (Exception e) when (e is SqliteException or UnauthorizedAccessException or IOException)
        {
            throw new StoreException($"{FilePath}: {e.Message}", e);
        }
    }

    /// <summary>Questions can be personal data: the file and its folder are readable by the owner only.</summary>
    void CreateFilePrivately()
    {
        var dir = Path.GetDirectoryName(FilePath)!;
        if (!Directory.Exists(dir))
        {
            if (OperatingSystem.IsWindows()) Directory.CreateDirectory(dir);
            else Directory.CreateDirectory(dir, UnixFileMode.UserRead | UnixFileMode.UserWrite | UnixFileMode.UserExecute);
        }
        if (!File.Exists(FilePath) && !OperatingSystem.IsWindows())
        {
            using var _ = new FileStream(FilePath, new FileStreamOptions
            {
                Mode = FileMode.CreateNew,
                Access = FileAccess.Write,
                UnixCreateMode = UnixFileMode.UserRead | UnixFileMode.UserWrite,
            });
        }
    }

    SqliteConnection Connect(bool create = true)
    {
        var c = new SqliteConnection(create ? _connectionString : _readConnectionString);
        c.Open();
        // Writes only: synchronous=NORMAL is crash-safe in WAL mode (only a power loss can undo the last commits).
        // Reads skip the round trip; Microsoft.Data.Sqlite retries a busy read until DefaultTimeout.
        if (create) c.Execute("PRAGMA synchronous=NORMAL; PRAGMA busy_timeout=2000;");
        return c;
    }

    public async Task<long> AddAsync(NewEntry entry, CancellationToken cancel)
    {
        var op = new WriteOp.Insert(entry);
        await EnqueueAsync(op, cancel);
        return await op.Result.Task.WaitAsync(cancel);
    }

    /// <summary>Hit counts add up in memory like the tallies and are written once per batch (see <see cref="Count"/>).</summary>
    readonly ConcurrentDictionary<long, (long Count, long Last)> _hits = new();

    public void RecordHit(long id, DateTimeOffset at)
    {
        if (ReadOnly) return;
        var ms = at.ToUnixTimeMilliseconds();
        _hits.AddOrUpdate(id, (1, ms), (_, v) => (v.Count + 1, Math.Max(v.Last, ms)));
        WakeForPending();
    }

    /// <summary>
    /// Tallies add up in memory and are written once per batch: a hit then costs one queued write (its hit count),
    /// not three. A crash loses at most the last batch's tallies, which are statistics, never entries.
    /// </summary>
    readonly ConcurrentDictionary<(string Lane, string Name), long> _tallies = new();
    int _pendingWake;

    public void Count(string lane, string name, long by = 1)
    {
        if (ReadOnly) return;
        _tallies.AddOrUpdate((lane, name), by, (_, v) => v + by);
        WakeForPending();
    }

    void WakeForPending()
    {
        if (Interlocked.Exchange(ref _pendingWake, 1) == 0) _queue.Writer.TryWrite(WriteOp.Wake.Instance);
    }

    public void AppendEvent(EventRow row)
    {
        if (!_events.Enabled || ReadOnly) return;
        if (!_queue.Writer.TryWrite(new WriteOp.Event(row))) Interlocked.Increment(ref DroppedWrites);
    }

    public void SaveTemplate(TemplateRow row)
    {
        if (ReadOnly) return;
        if (!_queue.Writer.TryWrite(new WriteOp.Template(row))) Interlocked.Increment(ref DroppedWrites);
    }

    public async Task<IReadOnlyList<long>> PurgeAsync(PurgeFilter filter, CancellationToken cancel)
    {
        if (filter.IsEmpty) throw new ArgumentException("a purge needs at least one of lane, partition, age or id");
        var op = new WriteOp.Purge(filter);
        await EnqueueAsync(op, cancel);
        return await op.Result.Task.WaitAsync(cancel);
    }

    public async Task FlushAsync(CancellationToken cancel)
    {
        if (ReadOnly) return; // nothing is ever queued
        var op = new WriteOp.Barrier();
        await EnqueueAsync(op, cancel);
        await op.Result.Task.WaitAsync(cancel);
    }

    async Task EnqueueAsync(WriteOp op, CancellationToken cancel)
    {
        if (_writer is null)
            throw new StoreException(ReadOnly ? $"{FilePath}: the store is open read-only" : "the store is not open");
        await _queue.Writer.WriteAsync(op, cancel);
    }

    // One process uses a SQLite store, and the in-process Coalescer already makes concurrent identical misses one
    // upstream call: there is no other process to claim against.
    public Task<bool> ClaimMissAsync(string scopeKey, string normalized, TimeSpan hold, CancellationToken cancel) => Task.FromResult(true);

    public Task ReleaseMissAsync(string scopeKey, string normalized, CancellationToken cancel) => Task.CompletedTask;

    public Task<bool> IsClaimedAsync(string scopeKey, string normalized, CancellationToken cancel) => Task.FromResult(false);

    /// <summary>Stops taking writes, writes what is queued, and closes.</summary>
    public async ValueTask DisposeAsync()
    {
        _queue.Writer.TryComplete();
        if (_writer is not null)
        {
            try
            {
                await _writer.WaitAsync(TimeSpan.FromSeconds(10));
            }
            catch (TimeoutException)
            {
                _log.LogWarning("store: gave up waiting for queued writes on shutdown");
            }
        }
        ReleaseConnections();
    }
}
