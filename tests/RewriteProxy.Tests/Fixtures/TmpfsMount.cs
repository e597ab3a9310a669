using System.Diagnostics;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>
/// A small tmpfs for a store that a test fills up under a running proxy (disk full). Needs root with CAP_SYS_ADMIN,
/// which the project's machines and CI have; elsewhere the test fails with a clear message.
/// </summary>
public sealed class TmpfsMount : IDisposable
{
    public string Path { get; }

    TmpfsMount(string path) => Path = path;

    public static TmpfsMount Create(string size)
    {
        var path = System.IO.Path.Combine(System.IO.Path.GetTempPath(), "rewriteproxy-mount-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(path);
        var (exit, output) = FileFaults.Run("mount", "-t", "tmpfs", "-o", $"size={size},mode=0700", "tmpfs", path);
        if (exit != 0) Assert.Fail($"cannot mount a tmpfs for this test (needs root with CAP_SYS_ADMIN): {output}");
        return new TmpfsMount(path);
    }

    public void Dispose()
    {
        FileFaults.Run("umount", "-l", Path);
        try { Directory.Delete(Path); } catch (IOException) { } catch (UnauthorizedAccessException) { }
    }
}

/// <summary>Makes files fail under a running process the way real ones do.</summary>
public static class FileFaults
{
    /// <summary>
    /// Sets the immutable attribute (chattr +i, ext2/3/4): unlike file modes, it stops even root, and even writes
    /// through descriptors opened before. Returns an undo action.
    /// </summary>
    public static IDisposable MakeImmutable(params string[] files)
    {
        var present = files.Where(File.Exists).ToArray();
        foreach (var f in present)
        {
            var (exit, output) = Run("chattr", "+i", f);
            if (exit != 0) Assert.Fail($"chattr +i {f} failed (the test needs an ext4 temp folder and root): {output}");
        }
        return new Undo(() =>
        {
            foreach (var f in present) Run("chattr", "-i", f);
        });
    }

    sealed class Undo(Action action) : IDisposable
    {
        public void Dispose() => action();
    }

    public static (int, string) Run(string exe, params string[] args)
    {
        var start = new ProcessStartInfo(exe) { RedirectStandardError = true, RedirectStandardOutput = true };
        foreach (var a in args) start.ArgumentList.Add(a);
        using var p = Process.Start(start)!;
        var output = p.StandardError.ReadToEnd() + p.StandardOutput.ReadToEnd();
        p.WaitForExit(10_000);
        return (p.ExitCode, output);
    }
}
