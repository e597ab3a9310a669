using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Hosting;

/// <summary>
/// The proxy reads its configuration once and watches no file. ASP.NET Core's builder would otherwise watch its working
/// directory and every folder below it (one inotify watch each: 1 897 when started from this repository, measured),
/// which costs start-up time and can exhaust the user's inotify limits when started from a large tree.
/// </summary>
public sealed class FileWatchTests : UpstreamAndProxy
{
    protected override bool StartsProxy => false;

    [Fact]
    public async Task The_running_proxy_holds_no_inotify_watch()
    {
        if (!OperatingSystem.IsLinux()) return;
        await using var proxy = await ProxyProcess.StartAsync(Upstream.BaseUrl, TestProxy.NewStorePath());

        // proc(5): an inotify descriptor links to "anon_inode:inotify"; its fdinfo has one "inotify wd:" line per watch.
        var watches = 0;
        foreach (var fd in Directory.GetFiles($"/proc/{proxy.Pid}/fd"))
        {
            string? target;
            try { target = new FileInfo(fd).LinkTarget; }
            catch (IOException) { continue; } // closed meanwhile
            if (target != "anon_inode:inotify") continue;
            watches += File.ReadLines($"/proc/{proxy.Pid}/fdinfo/{Path.GetFileName(fd)}").Count(l => l.StartsWith("inotify wd:", StringComparison.Ordinal));
        }
        Assert.Equal(0, watches);
    }
}
