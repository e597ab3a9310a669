namespace RewriteProxy.Tests.Fixtures;

/// <summary>The checkout the tests run from: the folder holding RewriteProxy.sln, found by walking up from the test binaries.</summary>
public static class RepositoryRoot
{
    static readonly Lazy<string> Found = new(() =>
    {
        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
            if (System.IO.File.Exists(System.IO.Path.Combine(dir.FullName, "RewriteProxy.sln")))
                return dir.FullName;
        throw new InvalidOperationException($"No RewriteProxy.sln above {AppContext.BaseDirectory}.");
    });

    public static string Path => Found.Value;

    /// <summary>A path below the root, from its parts.</summary>
    public static string File(params string[] parts) => System.IO.Path.Combine([Path, .. parts]);
}
