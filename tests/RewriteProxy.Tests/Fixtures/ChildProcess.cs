using System.Diagnostics;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>Ends a process a fixture started, by the PID its Process object holds, and nothing else.</summary>
public static class ChildProcess
{
    public static async Task StopAsync(Process process)
    {
        try
        {
            if (!process.HasExited)
            {
                process.Kill();
                using var wait = new CancellationTokenSource(TimeSpan.FromSeconds(10));
                await process.WaitForExitAsync(wait.Token);
            }
        }
        catch (InvalidOperationException)
        {
            // exited between the check and the kill
        }
        finally
        {
            process.Dispose();
        }
    }
}
