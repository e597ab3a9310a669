using Microsoft.Extensions.Configuration;

namespace RewriteProxy.Hosting;

/// <summary>
/// Builds the configuration in the documented order: the JSON file, then <c>REWRITEPROXY_</c> environment
/// variables, then command-line overrides (<c>--Upstream:BaseUrl=...</c>); later sources win.
/// </summary>
public static class ConfigurationLoader
{
    public const string DefaultFile = "config/rewriteproxy.json";
    public const string EnvironmentPrefix = "REWRITEPROXY_";

    /// <summary>The file to read: the one given, else ./config/rewriteproxy.json, else the copy beside the binary.</summary>
    public static string? ResolveFile(string? explicitFile)
    {
        if (explicitFile is not null) return Path.GetFullPath(explicitFile);
        var local = Path.GetFullPath(DefaultFile);
        if (File.Exists(local)) return local;
        var beside = Path.Combine(AppContext.BaseDirectory, DefaultFile);
        return File.Exists(beside) ? beside : null;
    }

    /// <exception cref="ConfigurationFileException">the file is missing or is not valid JSON.</exception>
    public static IConfigurationRoot Load(string? explicitFile, IEnumerable<string> overrides,
        IReadOnlyDictionary<string, string?>? extra = null)
    {
        var builder = new ConfigurationBuilder();
        var file = ResolveFile(explicitFile);
        if (explicitFile is not null && !File.Exists(file))
            throw new ConfigurationFileException($"--config {explicitFile}: the file does not exist");
        if (file is not null) builder.AddJsonFile(file, optional: false, reloadOnChange: false);
        if (extra is not null) builder.AddInMemoryCollection(extra);
        builder.AddEnvironmentVariables(EnvironmentPrefix);
        builder.AddCommandLine(overrides.ToArray());
        try
        {
            return builder.Build();
        }
        catch (Exception e) when (e is FormatException or InvalidDataException or IOException)
        {
            var inner = e.InnerException?.Message ?? e.Message;
            throw new ConfigurationFileException($"{file}: not valid JSON: {inner}");
        }
    }
}

/// <summary>A configuration file that cannot be used; the message is one line for the operator.</summary>
public sealed class ConfigurationFileException(string message) : Exception(message);
