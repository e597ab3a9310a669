using System.Runtime.InteropServices;
using System.Text.Json;
using System.Threading.Channels;
using Dapper;
using Microsoft.Data.Sqlite;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Cache;

/// <summary>
/// The embedded store: one SQLite file in WAL mode. Reads run on pooled connections; every write goes through one
/// background writer that commits in batches, so requests never wait on each other's writes.
/// </summary>
public sealed class SqliteRewriteStore : IRewriteStore
{
    /// <summary>Most operations waiting for the writer; beyond it hit counts and events are dropped (counted), never requests.</summary>
    const int QueueCapacity = 16_384;
    /// <summary>Most operations in one transaction: large enough to amortise the commit, small enough to keep it short.</summary>
    const int BatchSize = 512;
    /// <summary>How often expiry and retention run, and the file is checked to still be there.</summary>
    static readonly TimeSpan SweepEvery = TimeSpan.FromSeconds(30);

    readonly StoreOptions _options;
    readonly EventsOptions _events;
    readonly ILogger _log;
    readonly string _connectionString;
    /// <summary>Reads never create the file: a store deleted under us must not silently reappear empty from a read.</summary>
    readonly string _readConnectionString;
    readonly Channel<WriteOp> _queue = Channel.CreateBounded<WriteOp>(new BoundedChannelOptions(QueueCapacity)
    {
        SingleReader = true,
        FullMode = BoundedChannelFullMode.Wait,
    });
    Task? _writer;
    long _entryCount;
    long _eventCount;
    DateTimeOffset _nextSweep;

    public event Action<IReadOnlyList<long>>? Removed;
    public event Action? Reset;

    /// <summary>Operations dropped because the queue was full (hit counts, events).</summary>
    public long DroppedWrites;

    public string FilePath { get; }

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

    public void Open()
    {
        try
        {
            CreateFilePrivately();
            using var c = Connect();
            c.Execute("PRAGMA journal_mode=WAL;");
            var version = c.ExecuteScalar<long>("PRAGMA user_version;");
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
            _entryCount = c.ExecuteScalar<long>("SELECT COUNT(*) FROM entries;");
            _eventCount = c.ExecuteScalar<long>("SELECT COUNT(*) FROM events;");
        }
        catch (SqliteException e)
        {
            throw new StoreException($"{FilePath}: {e.Message}", e);
        }
        catch (UnauthorizedAccessException e)
        {
            throw new StoreException($"{FilePath}: {e.Message}", e);
        }
        _writer ??= Task.Run(WriteLoopAsync);
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

    T Read<T>(Func<SqliteConnection, T> read)
    {
        // One stat() per read: a deleted file is noticed at once, not at the next sweep.
        if (!File.Exists(FilePath))
        {
            RequestRecovery(Recovery.Gone);
            throw new StoreException($"store read failed: {FilePath} is gone");
        }
        try
        {
            using var c = Connect(create: false);
            return read(c);
        }
        catch (SqliteException e)
        {
            if (IsCorruption(e)) RequestRecovery(Recovery.Corrupt);
            throw new StoreException($"store read failed: {e.Message}", e);
        }
        catch (InvalidOperationException e)
        {
            throw new StoreException($"store read failed: {e.Message}", e);
        }
    }

    const string EntryColumns = """
        id AS Id, scope_key AS ScopeKey, partition_hash AS PartitionHash, lane AS Lane, question AS Question,
        normalized AS Normalized, content AS Content, scores AS Scores, response_model AS ResponseModel, model_id AS ModelId,
        prompt_tokens AS PromptTokens, completion_tokens AS CompletionTokens, created AS Created, last_hit AS LastHit,
        hit_count AS HitCount
        """;

    public StoredEntry? FindExact(string scopeKey, string normalized, DateTimeOffset minCreated) => Read(c =>
        c.QuerySingleOrDefault<SqliteEntryRow>(
            $"SELECT {EntryColumns} FROM entries WHERE scope_key = @scopeKey AND normalized = @normalized AND created >= @min",
            new { scopeKey, normalized, min = minCreated.ToUnixTimeMilliseconds() })?.Decode());

    public StoredEntry? Get(long id, DateTimeOffset minCreated) => Read(c =>
        c.QuerySingleOrDefault<SqliteEntryRow>($"SELECT {EntryColumns} FROM entries WHERE id = @id AND created >= @min",
            new { id, min = minCreated.ToUnixTimeMilliseconds() })?.Decode());

    public IEnumerable<IndexRow> ReadVectors(string modelId)
    {
        var rows = new List<IndexRow>();
        Read(c =>
        {
            using var reader = c.ExecuteReader(
                "SELECT id, scope_key, vector FROM entries WHERE model_id = @modelId AND vector IS NOT NULL", new { modelId });
            while (reader.Read())
            {
                var bytes = (byte[])reader.GetValue(2);
                rows.Add(new IndexRow(reader.GetInt64(0), reader.GetString(1), MemoryMarshal.Cast<byte, float>(bytes).ToArray()));
            }
            return 0;
        });
        return rows;
    }

    public List<StoredEntry> List(string? lane, string? partitionHash, string? contains, int limit) => Read(c =>
        c.Query<SqliteEntryRow>($"""
            SELECT {EntryColumns} FROM entries
            WHERE (@lane IS NULL OR lane = @lane) AND (@partitionHash IS NULL OR partition_hash = @partitionHash)
              AND (@contains IS NULL OR instr(normalized, @contains) > 0)
            ORDER BY last_hit DESC LIMIT @limit
            """, new { lane, partitionHash, contains = contains is null ? null : QuestionText.Normalize(contains), limit })
            .Select(r => r.Decode()).ToList());

    public List<EventRow> Events(string? lane, DateTimeOffset since) => Read(c =>
        c.Query<(long At, string Lane, string PartitionHash, string Kind, string Question, string Candidate, double Score, string Verdict, string? Reason)>(
            """
            SELECT at, lane, partition_hash, kind, question, candidate, score, verdict, reason FROM events
            WHERE (@lane IS NULL OR lane = @lane) AND at >= @since ORDER BY at
            """, new { lane, since = since.ToUnixTimeMilliseconds() })
            .Select(r => new EventRow(DateTimeOffset.FromUnixTimeMilliseconds(r.At), r.Lane, r.PartitionHash, r.Kind, r.Question,
                r.Candidate, r.Score, r.Verdict, r.Reason)).ToList());

    public async Task<long> AddAsync(NewEntry entry, CancellationToken cancel)
    {
        var op = new WriteOp.Insert(entry);
        await EnqueueAsync(op, cancel);
        return await op.Result.Task.WaitAsync(cancel);
    }

    /// <summary>Hit counts add up in memory like the tallies and are written once per batch (see <see cref="Count"/>).</summary>
    readonly System.Collections.Concurrent.ConcurrentDictionary<long, (long Count, long Last)> _hits = new();

    public void RecordHit(long id, DateTimeOffset at)
    {
        var ms = at.ToUnixTimeMilliseconds();
        _hits.AddOrUpdate(id, (1, ms), (_, v) => (v.Count + 1, Math.Max(v.Last, ms)));
        WakeForPending();
    }

    /// <summary>
    /// Tallies add up in memory and are written once per batch: a hit then costs one queued write (its hit count),
    /// not three. A crash loses at most the last batch's tallies, which are statistics, never entries.
    /// </summary>
    readonly System.Collections.Concurrent.ConcurrentDictionary<(string Lane, string Name), long> _tallies = new();
    int _pendingWake;

    public void Count(string lane, string name, long by = 1)
    {
        _tallies.AddOrUpdate((lane, name), by, (_, v) => v + by);
        WakeForPending();
    }

    void WakeForPending()
    {
        if (Interlocked.Exchange(ref _pendingWake, 1) == 0) _queue.Writer.TryWrite(WriteOp.Wake.Instance);
    }

    public void AppendEvent(EventRow row)
    {
        if (!_events.Enabled) return;
        if (!_queue.Writer.TryWrite(new WriteOp.Event(row))) Interlocked.Increment(ref DroppedWrites);
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
        var op = new WriteOp.Barrier();
        await EnqueueAsync(op, cancel);
        await op.Result.Task.WaitAsync(cancel);
    }

    async Task EnqueueAsync(WriteOp op, CancellationToken cancel)
    {
        if (_writer is null) throw new StoreException("the store is not open");
        await _queue.Writer.WriteAsync(op, cancel);
    }

    public StoreStats Stats() => Read(c =>
    {
        var entries = c.Query<(string Lane, long N)>("SELECT lane, COUNT(*) FROM entries GROUP BY lane")
            .ToDictionary(r => r.Lane, r => r.N, StringComparer.Ordinal);
        var tallies = c.Query<(string Lane, string Name, long Value)>("SELECT lane, name, value FROM tallies")
            .GroupBy(r => r.Lane, StringComparer.Ordinal)
            .ToDictionary(g => g.Key, g => g.ToDictionary(r => r.Name, r => r.Value, StringComparer.Ordinal), StringComparer.Ordinal);
        var lanes = entries.Keys.Union(tallies.Keys).Order(StringComparer.Ordinal).Select(lane =>
        {
            var t = tallies.GetValueOrDefault(lane) ?? [];
            long Get(string name) => t.GetValueOrDefault(name);
            IReadOnlyDictionary<string, long> Prefixed(string prefix) => t.Where(p => p.Key.StartsWith(prefix, StringComparison.Ordinal))
                .ToDictionary(p => p.Key[prefix.Length..], p => p.Value);
            return new LaneStats(lane, entries.GetValueOrDefault(lane), Get(Tally.Lookup("hit_exact")), Get(Tally.Lookup("hit_semantic")),
                Get(Tally.Lookup("miss")), Get(Tally.Lookup("bypass")), Get(Tally.TokensSaved), Prefixed("dropped:"), Prefixed("refused:"));
        }).ToList();
        long bytes = 0;
        foreach (var suffix in new[] { "", "-wal", "-shm" })
            if (File.Exists(FilePath + suffix)) bytes += new FileInfo(FilePath + suffix).Length;
        return new StoreStats(lanes, bytes);
    });

    public long EntryCount => Interlocked.Read(ref _entryCount);

    /// <summary>
    /// Closes this store's idle pooled connections (both connection strings). Only this store's pools: clearing every
    /// pool of the process would pull connections from under other stores (tests run many at once).
    /// </summary>
    public void ReleaseConnections()
    {
        using (var c = new SqliteConnection(_connectionString)) SqliteConnection.ClearPool(c);
        using (var c = new SqliteConnection(_readConnectionString)) SqliteConnection.ClearPool(c);
    }

    async Task WriteLoopAsync()
    {
        var reader = _queue.Reader;
        var batch = new List<WriteOp>(BatchSize);
        _nextSweep = DateTimeOffset.UtcNow + SweepEvery;
        while (true)
        {
            bool more;
            try
            {
                using var tick = new CancellationTokenSource(SweepEvery);
                more = await reader.WaitToReadAsync(tick.Token);
            }
            catch (OperationCanceledException)
            {
                more = true; // nothing arrived: time to sweep
            }
            if (!more && !reader.TryPeek(out _)) break;
            RecoverIfAsked();
            batch.Clear();
            while (batch.Count < BatchSize && reader.TryRead(out var op)) batch.Add(op);
            if (batch.Count > 0) WriteBatch(batch);
            RecoverIfAsked();
            if (DateTimeOffset.UtcNow >= _nextSweep)
            {
                _nextSweep = DateTimeOffset.UtcNow + SweepEvery;
                Sweep();
            }
        }
    }

    void WriteBatch(List<WriteOp> batch)
    {
        var removed = new List<long>();
        try
        {
            using var c = Connect();
            using var tx = c.BeginTransaction();
            foreach (var op in batch)
            {
                switch (op)
                {
                    case WriteOp.Insert insert:
                        insert.Id = InsertEntry(c, tx, insert.Entry);
                        break;

                    case WriteOp.Event ev:
                        InsertEvent(c, tx, ev.Row);
                        _eventCount++;
                        break;
                    case WriteOp.Purge purge:
                        purge.Ids = Purge(c, tx, purge.Filter);
                        removed.AddRange(purge.Ids);
                        break;
                }
            }
            WritePending(c, tx);
            removed.AddRange(EvictOverflow(c, tx));
            if (_eventCount > _events.MaxRows)
            {
                var excess = _eventCount - _events.MaxRows;
                _eventCount -= c.Execute("DELETE FROM events WHERE id IN (SELECT id FROM events ORDER BY id LIMIT @excess)", new { excess }, tx);
            }
            tx.Commit();
        }
        catch (Exception e) when (e is SqliteException or InvalidOperationException or IOException)
        {
            if (e is SqliteException se && IsCorruption(se)) RequestRecovery(Recovery.Corrupt);
            else if (!File.Exists(FilePath)) RequestRecovery(Recovery.Gone);
            var failure = new StoreException($"store write failed: {e.Message}", e);
            foreach (var op in batch) op.Fail(failure);
            _log.LogError("store: a batch of {Count} writes failed: {Reason}", batch.Count, e.Message);
            RecountAfterFailure();
            return;
        }
        foreach (var op in batch) op.Complete();
        if (removed.Count > 0) Removed?.Invoke(removed);
    }

    void WritePending(SqliteConnection c, SqliteTransaction tx)
    {
        Volatile.Write(ref _pendingWake, 0);
        foreach (var id in _hits.Keys)
        {
            if (!_hits.TryRemove(id, out var hit)) continue;
            c.Execute("UPDATE entries SET hit_count = hit_count + @Count, last_hit = MAX(last_hit, @Last) WHERE id = @id",
                new { id, hit.Count, hit.Last }, tx);
        }
        foreach (var key in _tallies.Keys)
        {
            if (!_tallies.TryRemove(key, out var by) || by == 0) continue;
            c.Execute("""
                INSERT INTO tallies (lane, name, value) VALUES (@Lane, @Name, @by)
                ON CONFLICT (lane, name) DO UPDATE SET value = value + excluded.value
                """, new { key.Lane, key.Name, by }, tx);
        }
    }

    long InsertEntry(SqliteConnection c, SqliteTransaction tx, NewEntry e)
    {
        var created = e.Created.ToUnixTimeMilliseconds();
        var existed = c.ExecuteScalar<long?>("SELECT id FROM entries WHERE scope_key = @ScopeKey AND normalized = @Normalized",
            new { e.ScopeKey, e.Normalized }, tx);
        var id = c.ExecuteScalar<long>("""
            INSERT INTO entries (scope_key, partition_hash, lane, question, normalized, vector, model_id, content, scores,
                                 response_model, prompt_tokens, completion_tokens, created, last_hit, hit_count)
            VALUES (@ScopeKey, @PartitionHash, @Lane, @Question, @Normalized, @vector, @ModelId, @Content, @scores,
                    @ResponseModel, @PromptTokens, @CompletionTokens, @created, @created, 0)
            ON CONFLICT (scope_key, normalized) DO UPDATE SET
                question = excluded.question, vector = excluded.vector, model_id = excluded.model_id,
                content = excluded.content, scores = excluded.scores, response_model = excluded.response_model,
                prompt_tokens = excluded.prompt_tokens, completion_tokens = excluded.completion_tokens,
                created = excluded.created, last_hit = excluded.last_hit, hit_count = 0
            RETURNING id
            """, new
        {
            e.ScopeKey, e.PartitionHash, e.Lane, e.Question, e.Normalized,
            vector = e.Vector is null ? null : MemoryMarshal.AsBytes(e.Vector.AsSpan()).ToArray(),
            e.ModelId, e.Content, scores = JsonSerializer.Serialize(e.Scores), e.ResponseModel, e.PromptTokens, e.CompletionTokens, created,
        }, tx);
        if (existed is null) _entryCount++;
        return id;
    }

    static void InsertEvent(SqliteConnection c, SqliteTransaction tx, EventRow r) => c.Execute("""
        INSERT INTO events (at, lane, partition_hash, kind, question, candidate, score, verdict, reason)
        VALUES (@at, @Lane, @PartitionHash, @Kind, @Question, @Candidate, @Score, @Verdict, @Reason)
        """, new { at = r.At.ToUnixTimeMilliseconds(), r.Lane, r.PartitionHash, r.Kind, r.Question, r.Candidate, r.Score, r.Verdict, r.Reason }, tx);

    List<long> Purge(SqliteConnection c, SqliteTransaction tx, PurgeFilter f)
    {
        long? before = f.OlderThan is { } age ? (DateTimeOffset.UtcNow - age).ToUnixTimeMilliseconds() : null;
        var ids = c.Query<long>("""
            DELETE FROM entries
            WHERE (@Lane IS NULL OR lane = @Lane) AND (@PartitionHash IS NULL OR partition_hash = @PartitionHash)
              AND (@before IS NULL OR created < @before) AND (@Id IS NULL OR id = @Id)
            RETURNING id
            """, new { f.Lane, f.PartitionHash, before, f.Id }, tx).AsList();
        _entryCount -= ids.Count;
        return ids;
    }

    /// <summary>Least recently hit entries beyond Store:MaxEntries go first.</summary>
    List<long> EvictOverflow(SqliteConnection c, SqliteTransaction tx)
    {
        if (_entryCount <= _options.MaxEntries) return [];
        var excess = _entryCount - _options.MaxEntries;
        var ids = c.Query<long>(
            "DELETE FROM entries WHERE id IN (SELECT id FROM entries ORDER BY last_hit, id LIMIT @excess) RETURNING id",
            new { excess }, tx).AsList();
        _entryCount -= ids.Count;
        return ids;
    }

    enum Recovery { None, Gone, Corrupt }

    /// <summary>Least time between two recovery attempts, so a store that cannot be recreated is not retried on every request.</summary>
    static readonly TimeSpan RecoveryBackoff = TimeSpan.FromSeconds(5);
    int _recovery;
    DateTimeOffset _lastRecovery = DateTimeOffset.MinValue;

    static bool IsCorruption(SqliteException e) => e.SqliteErrorCode is 11 /* SQLITE_CORRUPT */ or 26 /* SQLITE_NOTADB */;

    void RequestRecovery(Recovery what)
    {
        if (Interlocked.CompareExchange(ref _recovery, (int)what, (int)Recovery.None) == (int)Recovery.None)
            _queue.Writer.TryWrite(new WriteOp.Barrier()); // wakes the writer, which recovers
    }

    /// <summary>
    /// On the writer: a deleted file is recreated empty (pooled connections would otherwise keep writing to an unlinked
    /// inode); a corrupt file is moved aside as <c>{path}.corrupt-{time}</c>, kept for inspection, and replaced by an empty one.
    /// </summary>
    void RecoverIfAsked()
    {
        var what = (Recovery)Volatile.Read(ref _recovery);
        if (what == Recovery.None) return;
        if (DateTimeOffset.UtcNow - _lastRecovery < RecoveryBackoff)
        {
            Volatile.Write(ref _recovery, (int)Recovery.None);
            return;
        }
        _lastRecovery = DateTimeOffset.UtcNow;
        ReleaseConnections();
        try
        {
            if (what == Recovery.Corrupt)
            {
                var aside = $"{FilePath}.corrupt-{DateTimeOffset.UtcNow:yyyyMMddTHHmmss}";
                foreach (var suffix in new[] { "", "-wal", "-shm" })
                    if (File.Exists(FilePath + suffix)) File.Move(FilePath + suffix, aside + suffix, overwrite: true);
                _log.LogError("store: {Path} is damaged; moved it to {Aside} and started an empty store", FilePath, aside);
            }
            else
            {
                _log.LogError("store: {Path} is gone; starting an empty store", FilePath);
            }
            Open();
            Reset?.Invoke();
        }
        catch (Exception e) when (e is StoreException or IOException or UnauthorizedAccessException)
        {
            _log.LogError("store: cannot start an empty store at {Path}: {Reason}", FilePath, e.Message);
        }
        finally
        {
            Volatile.Write(ref _recovery, (int)Recovery.None);
        }
    }

    void Sweep()
    {
        if (!File.Exists(FilePath))
        {
            RequestRecovery(Recovery.Gone);
            return;
        }
        try
        {
            using var c = Connect();
            using var tx = c.BeginTransaction();
            var expired = c.Query<long>("DELETE FROM entries WHERE created < @min RETURNING id",
                new { min = (DateTimeOffset.UtcNow - _options.Ttl).ToUnixTimeMilliseconds() }, tx).AsList();
            _entryCount -= expired.Count;
            _eventCount -= c.Execute("DELETE FROM events WHERE at < @min",
                new { min = (DateTimeOffset.UtcNow - _events.Retention).ToUnixTimeMilliseconds() }, tx);
            tx.Commit();
            if (expired.Count > 0) Removed?.Invoke(expired);
        }
        catch (Exception e) when (e is SqliteException or InvalidOperationException or IOException)
        {
            _log.LogError("store: expiry sweep failed: {Reason}", e.Message);
        }
    }

    void RecountAfterFailure()
    {
        try
        {
            using var c = Connect();
            _entryCount = c.ExecuteScalar<long>("SELECT COUNT(*) FROM entries;");
            _eventCount = c.ExecuteScalar<long>("SELECT COUNT(*) FROM events;");
        }
        catch (Exception e) when (e is SqliteException or InvalidOperationException or IOException)
        {
            // The store is unusable for now; counts are refreshed on the next success.
        }
    }

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

    abstract class WriteOp
    {
        public virtual void Complete() { }
        public virtual void Fail(Exception e) { }

        public sealed class Insert(NewEntry entry) : WriteOp
        {
            public NewEntry Entry { get; } = entry;
            public long Id;
            public TaskCompletionSource<long> Result { get; } = new(TaskCreationOptions.RunContinuationsAsynchronously);
            public override void Complete() => Result.TrySetResult(Id);
            public override void Fail(Exception e) => Result.TrySetException(e);
        }


        /// <summary>Nothing to do but wake the writer (pending tallies).</summary>
        public sealed class Wake : WriteOp
        {
            public static readonly Wake Instance = new();
        }

        public sealed class Event(EventRow row) : WriteOp
        {
            public EventRow Row { get; } = row;
        }

        public sealed class Purge(PurgeFilter filter) : WriteOp
        {
            public PurgeFilter Filter { get; } = filter;
            public List<long> Ids = [];
            public TaskCompletionSource<IReadOnlyList<long>> Result { get; } = new(TaskCreationOptions.RunContinuationsAsynchronously);
            public override void Complete() => Result.TrySetResult(Ids);
            public override void Fail(Exception e) => Result.TrySetException(e);
        }

        public sealed class Barrier : WriteOp
        {
            public TaskCompletionSource Result { get; } = new(TaskCreationOptions.RunContinuationsAsynchronously);
            public override void Complete() => Result.TrySetResult();
            public override void Fail(Exception e) => Result.TrySetException(e);
        }
    }
}
