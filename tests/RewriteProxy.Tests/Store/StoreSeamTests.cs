using System.Text.RegularExpressions;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Store;

/// <summary>
/// Nothing outside the store implementations knows which database is behind <c>IRewriteStore</c>: no database names,
/// no database client, no SQL. A source check, like the README checks: it reads the files as they are in the checkout.
/// </summary>
public sealed class StoreSeamTests
{
    /// <summary>Database and client names, and SQL statement openings as written in code (upper case, as this project writes SQL).</summary>
    static readonly Regex Forbidden = new(
        @"(?i:sqlite|npgsql|postgres|dapper)|\b(?:SELECT|INSERT INTO|DELETE FROM|CREATE TABLE|CREATE INDEX|PRAGMA|WHERE)\b|\bUPDATE \w+ SET\b",
        RegexOptions.Compiled);

    static IEnumerable<string> SourcesOutsideTheStore()
    {
        var proxy = RepositoryRoot.File("proxy");
        var store = Path.Combine(proxy, "Store") + Path.DirectorySeparatorChar;
        return Directory.EnumerateFiles(proxy, "*.cs", SearchOption.AllDirectories)
            .Where(f => !f.StartsWith(store, StringComparison.Ordinal))
            .Where(f => !f.Contains($"{Path.DirectorySeparatorChar}obj{Path.DirectorySeparatorChar}", StringComparison.Ordinal)
                        && !f.Contains($"{Path.DirectorySeparatorChar}bin{Path.DirectorySeparatorChar}", StringComparison.Ordinal));
    }

    [Fact]
    public void No_code_outside_proxy_Store_names_a_database_or_writes_sql()
    {
        var files = SourcesOutsideTheStore().ToList();
        Assert.True(files.Count > 50, $"only {files.Count} source files found under proxy/");
        var hits = files.SelectMany(f => File.ReadLines(f).Select((line, i) => (f, i, line)))
            .Where(x => Forbidden.IsMatch(x.line))
            .Select(x => $"{Path.GetRelativePath(RepositoryRoot.Path, x.f)}:{x.i + 1}: {x.line.Trim()}")
            .ToList();
        Assert.True(hits.Count == 0, string.Join("\n", hits));
    }

    [Fact]
    public void The_check_finds_what_it_is_for()
    {
        // A check that cannot fail is no check: each kind of line it must catch.
        Assert.Matches(Forbidden, "var store = new SqliteRewriteStore(options);");
        Assert.Matches(Forbidden, "using Npgsql;");
        Assert.Matches(Forbidden, "c.Execute(\"DELETE FROM entries\");");
        Assert.Matches(Forbidden, "\"UPDATE entries SET hit_count = 0\"");
        Assert.DoesNotMatch(Forbidden, "// Select the nearest candidates where the scope agrees.");
    }
}
