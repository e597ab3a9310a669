using System.Diagnostics;
using Npgsql;

namespace RewriteProxy.Store.Postgres;

/// <summary>Opening the store: more patience for the first connection than the request path has.</summary>
public sealed partial class PostgresConnector
{
    /// <summary>
    /// Seconds opening the store (migrations or the schema check) may keep trying for its connection when the connection
    /// string sets no <c>Timeout</c>: Npgsql's own default. The request path's short bound keeps a lane call from
    /// waiting on a slow database; a start that gives up after 2 s on a busy database server is a failed start
    /// (seen in a CI run on a loaded machine), and a start holds up no answer.
    /// </summary>
    public const int StartupConnectSeconds = 15;

    readonly TimeSpan _startupPatience;

    /// <summary>
    /// <see cref="RunLongAsync{T}"/> for opening the store, once a first connection is in the pool: one that times out
    /// while opening is tried again until <see cref="StartupConnectSeconds"/> have passed. It is the request path's own
    /// pool, so that pool keeps a warm connection once the store is open: a first lane call that had to open one within
    /// the request path's bound failed open on a loaded machine (measured in a CI run).
    /// </summary>
    public async Task<T> RunStartupAsync<T>(string what, Func<NpgsqlConnection, Task<T>> work, CancellationToken cancel)
    {
        var clock = Stopwatch.StartNew();
        while (true)
        {
            try
            {
                await using var first = await _source.OpenConnectionAsync(cancel);
                break;
            }
            catch (NpgsqlException e) when (e.InnerException is TimeoutException && clock.Elapsed + ConnectTimeout <= _startupPatience
                                             && !cancel.IsCancellationRequested)
            {
                // The server is there but slow to let a connection in: try again within the start's patience.
            }
            catch (Exception e) when (IsDatabaseFailure(e) && !cancel.IsCancellationRequested)
            {
                throw Failure(what, e);
            }
        }
        return await RunLongAsync(what, work, cancel);
    }
}
