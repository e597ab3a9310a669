using System.Net;
using System.Net.Sockets;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>Ports on 127.0.0.1 for the servers a test starts itself (a child proxy, Prometheus, a closed upstream).</summary>
public static class LoopbackPort
{
    /// <summary>Tries with another port when the one probed was taken before the server bound it.</summary>
    public const int Attempts = 3;

    /// <summary>
    /// A port that was free a moment ago: the system picked it for a listener that is closed again. Nothing listens
    /// on it now (a refused connection), and another process may take it before it is used, so a server started on it
    /// goes through <see cref="StartAsync{T}"/>.
    /// </summary>
    public static int Free()
    {
        using var probe = new TcpListener(IPAddress.Loopback, 0);
        probe.Start();
        return ((IPEndPoint)probe.LocalEndpoint).Port;
    }

    /// <summary>
    /// Starts a server on a free port and waits until it is ready; when the port was taken in between, disposes it and
    /// tries another, <see cref="Attempts"/> times in all.
    /// </summary>
    /// <param name="launch">Starts the server on the given port.</param>
    /// <param name="waitReady">Completes when the server answers; throws when it will not.</param>
    /// <param name="portTaken">Whether a failure of <paramref name="waitReady"/> means the port was taken.</param>
    /// <param name="what">The server's name, for the failure message.</param>
    public static async Task<T> StartAsync<T>(Func<int, T> launch, Func<T, Task> waitReady, Func<Exception, bool> portTaken, string what)
        where T : IAsyncDisposable
    {
        Exception? last = null;
        for (var attempt = 0; attempt < Attempts; attempt++)
        {
            var server = launch(Free());
            try
            {
                await waitReady(server);
                return server;
            }
            catch (Exception e) when (portTaken(e))
            {
                last = e;
                await server.DisposeAsync();
            }
            catch
            {
                await server.DisposeAsync();
                throw;
            }
        }
        throw new InvalidOperationException($"{what} did not start in {Attempts} attempts", last);
    }
}
