using System.Data.Common;
using System.Net.Sockets;
using System.Runtime.CompilerServices;
using Dapper;
using Npgsql;

namespace RewriteProxy.Store.Postgres;

/// <summary>
/// The store's way to the database: one Npgsql data source (its connection pool) with bounded timeouts, the circuit
/// breaker in front of it, and every failure turned into a <see cref="StoreException"/> that names the database by
/// <see cref="Location"/>, never by its connection string.
/// </summary>
public sealed partial class PostgresConnector : IAsyncDisposable
{
    /// <summary>
    /// Seconds to wait for a connection when the connection string sets no <c>Timeout</c> (Npgsql's own default is
    /// 15 s): a database that cannot be reached makes a lane call wait this long once, then the circuit fails fast.
    /// </summary>
    public const int DefaultConnectSeconds = 2;

    /// <summary>
    /// Seconds a command may run when the connection string sets no <c>Command Timeout</c> (Npgsql's default is 30 s):
    /// request-path reads take milliseconds, so a database this slow is treated as down and the call fails open.
    /// </summary>
    public const int DefaultCommandSeconds = 2;

    /// <summary>
    /// Seconds for work off the request path (background writes, sweeps, migrations, operator reads such as tune's
    /// million events), which may be long and never hold up a response.
    /// </summary>
    public const int LongCommandSeconds = 120;

    /// <summary>
    /// Milliseconds to wait for the server to confirm the cancellation of a timed-out command when the connection string
    /// sets no <c>Cancellation Timeout</c> (Npgsql's default 2000 would double the wait of a request-path read).
    /// </summary>
    public const int DefaultCancellationMilliseconds = 500;

    /// <summary>
    /// Statements Npgsql prepares on each connection once they were used twice, when the connection string sets no
    /// <c>Max Auto Prepare</c> (Npgsql's default 0 prepares none). The request path runs a handful of statements over
    /// and over; prepared, the server skips parsing and planning them on every lookup.
    /// </summary>
    public const int DefaultMaxAutoPrepare = 32;

    readonly NpgsqlDataSource _source;

    public PostgresConnector(string connectionString)
    {
        var builder = Parse(connectionString);
        if (!Names(connectionString, "Timeout")) builder.Timeout = DefaultConnectSeconds;
        if (!Names(connectionString, "Command Timeout")) builder.CommandTimeout = DefaultCommandSeconds;
        if (!Names(connectionString, "Cancellation Timeout")) builder.CancellationTimeout = DefaultCancellationMilliseconds;
        if (!Names(connectionString, "Max Auto Prepare")) builder.MaxAutoPrepare = DefaultMaxAutoPrepare;
        Location = Describe(builder);
        ConnectTimeout = TimeSpan.FromSeconds(builder.Timeout);
        CommandTimeout = TimeSpan.FromSeconds(builder.CommandTimeout);
        _source = NpgsqlDataSource.Create(builder);
        _startupPatience = TimeSpan.FromSeconds(Names(connectionString, "Timeout") ? builder.Timeout : StartupConnectSeconds);
    }

    /// <summary>"postgres user@host:port/database": where the store is, for logs and messages; never the password.</summary>
    public string Location { get; }

    public PostgresCircuit Circuit { get; } = new();

    /// <summary>How long opening a connection may take (the connection string's <c>Timeout</c>, or <see cref="DefaultConnectSeconds"/>).</summary>
    public TimeSpan ConnectTimeout { get; }

    /// <summary>How long a request-path command may take (<c>Command Timeout</c>, or <see cref="DefaultCommandSeconds"/>).</summary>
    public TimeSpan CommandTimeout { get; }

    /// <summary>Reads a connection string as Npgsql does; a malformed one is an <see cref="ArgumentException"/> that names the problem, not the string.</summary>
    public static NpgsqlConnectionStringBuilder Parse(string connectionString)
    {
        if (string.IsNullOrWhiteSpace(connectionString))
            throw new ArgumentException("the PostgreSQL connection string is empty");
        try
        {
            var builder = new NpgsqlConnectionStringBuilder(connectionString);
            if (string.IsNullOrEmpty(builder.Host)) throw new ArgumentException("the PostgreSQL connection string names no Host");
            return builder;
        }
        catch (Exception e) when (e is ArgumentException or FormatException or InvalidCastException or KeyNotFoundException)
        {
            // The exception's own message may quote the string, password included: say only what kind of problem it is.
            throw new ArgumentException($"the PostgreSQL connection string cannot be read ({e.GetType().Name}); "
                + "expected Npgsql's format, e.g. Host=db;Port=5432;Database=rewriteproxy;Username=rewriteproxy;Password=...");
        }
    }

    /// <summary>What is wrong with a connection string, or null when Npgsql can use it (the start-up check of Store:ConnectionString).</summary>
    public static string? Problem(string connectionString)
    {
        try
        {
            Parse(connectionString);
            return null;
        }
        catch (ArgumentException e)
        {
            return e.Message;
        }
    }

    public static string Describe(NpgsqlConnectionStringBuilder builder)
    {
        var user = string.IsNullOrEmpty(builder.Username) ? "" : builder.Username + "@";
        var database = string.IsNullOrEmpty(builder.Database) ? "" : "/" + builder.Database;
        return $"postgres {user}{builder.Host}:{builder.Port}{database}";
    }

    /// <summary>Whether the connection string sets a key itself (Npgsql reads "CommandTimeout" as "Command Timeout").</summary>
    static bool Names(string connectionString, string key)
    {
        static string Squeeze(string k) => k.Replace(" ", "", StringComparison.Ordinal).ToLowerInvariant();
        var parsed = new DbConnectionStringBuilder { ConnectionString = connectionString };
        return parsed.Keys.Cast<string>().Any(k => Squeeze(k) == Squeeze(key));
    }

    /// <summary>A pooled connection for work that handles its own failures (the listener, the writer).</summary>
    public ValueTask<NpgsqlConnection> OpenAsync(CancellationToken cancel) => _source.OpenConnectionAsync(cancel);

    /// <summary>
    /// The longest a request-path call may take, whatever the driver does: opening a connection plus one command.
    /// (Against a frozen server Npgsql gave up only after three times the command timeout, as it also waits on its
    /// cancellation request: docs/measurements/postgres-store.md.) A call cut off here goes on in the background and
    /// its late outcome is dropped.
    /// </summary>
    public TimeSpan RequestBound => ConnectTimeout + CommandTimeout;

    /// <summary>
    /// Runs request-path <paramref name="work"/> on a pooled connection through the circuit, within
    /// <see cref="RequestBound"/>: fails fast while the circuit is open, and turns a database failure or a call
    /// over its bound into a <see cref="StoreException"/> saying <paramref name="what"/> failed.
    /// </summary>
    public Task<T> RunAsync<T>(string what, Func<NpgsqlConnection, Task<T>> work, CancellationToken cancel) =>
        RunAsync(what, work, RequestBound, cancel);

    /// <summary>
    /// Like <see cref="RunAsync{T}(string, Func{NpgsqlConnection, Task{T}}, CancellationToken)"/> for work off the
    /// request path (writes in the background, sweeps, migrations, operator reads): bounded by its commands' own
    /// (long) timeouts only.
    /// </summary>
    public Task<T> RunLongAsync<T>(string what, Func<NpgsqlConnection, Task<T>> work, CancellationToken cancel) =>
        RunAsync(what, work, Timeout.InfiniteTimeSpan, cancel);

    async Task<T> RunAsync<T>(string what, Func<NpgsqlConnection, Task<T>> work, TimeSpan bound, CancellationToken cancel)
    {
        if (!Circuit.TryEnter()) throw Unreachable(what);
        var attempt = AttemptAsync(work, cancel);
        try
        {
            var result = await attempt.WaitAsync(bound, cancel);
            Circuit.Succeeded();
            return result;
        }
        catch (TimeoutException) when (!attempt.IsCompleted)
        {
            Forget(attempt);
            Circuit.Failed();
            throw new StoreException($"{what}: {Location} did not answer within {bound.TotalSeconds:0.#} s");
        }
        catch (OperationCanceledException) when (cancel.IsCancellationRequested)
        {
            Forget(attempt);
            Circuit.Abandoned();
            throw;
        }
        catch (Exception e) when (IsDatabaseFailure(e))
        {
            throw Failure(what, e);
        }
    }

    async Task<T> AttemptAsync<T>(Func<NpgsqlConnection, Task<T>> work, CancellationToken cancel)
    {
        await using var connection = await _source.OpenConnectionAsync(cancel);
        return await work(connection);
    }

    /// <summary>Observes the late end of a call given up on, so its failure is not an unobserved task exception.</summary>
    static void Forget(Task attempt) =>
        attempt.ContinueWith(t => _ = t.Exception, CancellationToken.None, TaskContinuationOptions.OnlyOnFaulted, TaskScheduler.Default);

    /// <summary>
    /// Streams the rows of a query, one connection held while the caller enumerates; failures (opening, or midway)
    /// become <see cref="StoreException"/>s like <see cref="RunLongAsync{T}"/>'s.
    /// </summary>
    public async IAsyncEnumerable<T> StreamAsync<T>(string what, CommandDefinition command, Func<DbDataReader, T> map,
        [EnumeratorCancellation] CancellationToken cancel)
    {
        if (!Circuit.TryEnter()) throw Unreachable(what);
        NpgsqlConnection? connection = null;
        DbDataReader? reader = null;
        try
        {
            connection = await _source.OpenConnectionAsync(cancel);
            reader = await connection.ExecuteReaderAsync(command);
            Circuit.Succeeded();
        }
        catch (Exception e) when (IsDatabaseFailure(e))
        {
            if (reader is not null) await reader.DisposeAsync();
            if (connection is not null) await connection.DisposeAsync();
            if (cancel.IsCancellationRequested) Circuit.Abandoned();
            else throw Failure(what, e);
            throw;
        }
        try
        {
            while (true)
            {
                bool more;
                try
                {
                    more = await reader.ReadAsync(cancel);
                }
                catch (Exception e) when (IsDatabaseFailure(e) && !cancel.IsCancellationRequested)
                {
                    throw Failure(what, e);
                }
                if (!more) break;
                yield return map(reader);
            }
        }
        finally
        {
            await reader.DisposeAsync();
            await connection.DisposeAsync();
        }
    }

    public StoreException Unreachable(string what) =>
        new($"{what}: {Location} did not answer a moment ago; the store is skipped until it does");

    /// <summary>Reports a failure to the circuit and says what failed where.</summary>
    public StoreException Failure(string what, Exception e)
    {
        if (IsConnectionFailure(e)) Circuit.Failed();
        else Circuit.Succeeded();
        return e as StoreException ?? new StoreException($"{what} failed at {Location}: {e.Message}", e);
    }

    /// <summary>Exceptions that mean the database (or the way to it) failed, as opposed to a bug of ours.</summary>
    public static bool IsDatabaseFailure(Exception e) =>
        e is NpgsqlException or StoreException or TimeoutException or IOException or SocketException or InvalidOperationException
            or OperationCanceledException;

    /// <summary>
    /// Whether the failure says the database is unreachable, shutting down or too slow (the circuit opens), rather than
    /// that it refused this query (a query error: the database is there).
    /// </summary>
    public static bool IsConnectionFailure(Exception e) => e switch
    {
        PostgresException p => p.SqlState.StartsWith("08", StringComparison.Ordinal) // connection exception
            || p.SqlState is "57P01" or "57P02" or "57P03" // admin shutdown, crash shutdown, cannot connect now
                or "53300" // too many connections
                or "57014", // query canceled: our command timeout
        NpgsqlException or TimeoutException or IOException or SocketException or OperationCanceledException => true,
        _ => false, // InvalidOperationException among them: a mapping or usage error of ours, which waiting would not cure
    };

    public ValueTask DisposeAsync() => _source.DisposeAsync();
}
