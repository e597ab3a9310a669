using Dapper;
using Microsoft.Extensions.Logging;
using Npgsql;

namespace RewriteProxy.Store.Postgres;

/// <summary>
/// Holds one connection that LISTENs on <see cref="PostgresEntryWrites.Channel"/> and raises ChangesAvailable on each
/// notification. After a connection loss it reconnects with a growing pause, and raises ChangesAvailable once it
/// listens again: what was committed meanwhile is fetched by the follower's catch-up by sequence, so a lost
/// notification delays a change, never loses it. A reconnect also closes the store's circuit at once.
/// </summary>
public sealed class PostgresListener : IAsyncDisposable
{
    /// <summary>First pause before reconnecting: a restart of the database is noticed within about this.</summary>
    static readonly TimeSpan FirstRetry = TimeSpan.FromMilliseconds(250);

    /// <summary>Longest pause between reconnects while the database stays down.</summary>
    static readonly TimeSpan LongestRetry = TimeSpan.FromSeconds(5);

    /// <summary>
    /// With no notification for this long, a query checks that the connection still works: a database lost without
    /// the connection being closed (a network cut) is noticed within this plus the command timeout.
    /// </summary>
    static readonly TimeSpan ProbeEvery = TimeSpan.FromSeconds(15);

    readonly PostgresConnector _connector;
    readonly Action _raise;
    readonly ILogger _log;
    readonly CancellationTokenSource _stop = new();
    readonly Task _loop;
    volatile bool _connected;

    public PostgresListener(PostgresConnector connector, Action raise, ILogger log)
    {
        _connector = connector;
        _raise = raise;
        _log = log;
        _loop = Task.Run(RunAsync);
    }

    /// <summary>Whether it listens now.</summary>
    public bool Connected => _connected;

    async Task RunAsync()
    {
        var retry = FirstRetry;
        var lost = false;
        while (!_stop.IsCancellationRequested)
        {
            try
            {
                await using var connection = await _connector.OpenAsync(_stop.Token);
                connection.Notification += OnNotification;
                await connection.ExecuteAsync(new CommandDefinition($"LISTEN {PostgresEntryWrites.Channel}", cancellationToken: _stop.Token));
                _connected = true;
                retry = FirstRetry;
                _connector.Circuit.Succeeded();
                if (lost) _log.LogInformation("store: listening for changes again at {Location}", _connector.Location);
                lost = false;
                _raise();
                while (true)
                    if (!await connection.WaitAsync(ProbeEvery, _stop.Token))
                        await connection.ExecuteAsync(new CommandDefinition("SELECT 1", cancellationToken: _stop.Token));
            }
            catch (OperationCanceledException) when (_stop.IsCancellationRequested)
            {
                break;
            }
            catch (Exception e) when (PostgresConnector.IsDatabaseFailure(e))
            {
                _connected = false;
                if (!lost) _log.LogWarning("store: lost the change listener's connection to {Location}: {Reason}", _connector.Location, e.Message);
                lost = true;
            }
            try
            {
                await Task.Delay(retry, _stop.Token);
            }
            catch (OperationCanceledException)
            {
                break;
            }
            retry = TimeSpan.FromTicks(Math.Min(retry.Ticks * 2, LongestRetry.Ticks));
        }
        _connected = false;
    }

    void OnNotification(object sender, NpgsqlNotificationEventArgs e) => _raise();

    public async ValueTask DisposeAsync()
    {
        await _stop.CancelAsync();
        await _loop.ContinueWith(_ => { }, TaskScheduler.Default);
        _stop.Dispose();
    }
}
