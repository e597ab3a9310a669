using System.CommandLine;
using System.Diagnostics.CodeAnalysis;
using Microsoft.Extensions.Configuration;
using RewriteProxy.Hosting;

namespace RewriteProxy.Cli;

/// <summary>Reads the configuration for any command and reports every bad setting as one line on stderr.</summary>
public static class Startup
{
    public static readonly Option<string?> ConfigFile = new("--config")
    {
        Description = $"JSON configuration file (default {ConfigurationLoader.DefaultFile}).",
        Recursive = true,
    };

    public static bool TryLoad(ParseResult parse, [NotNullWhen(true)] out RewriteProxyOptions? options,
        [NotNullWhen(true)] out IConfigurationRoot? configuration)
    {
        options = null;
        configuration = null;
        try
        {
            configuration = ConfigurationLoader.Load(parse.GetValue(ConfigFile), parse.UnmatchedTokens);
        }
        catch (ConfigurationFileException e)
        {
            Console.Error.WriteLine($"rewriteproxy: config: {e.Message}");
            return false;
        }
        var (read, errors) = OptionsReader.Read(configuration);
        foreach (var line in errors) Console.Error.WriteLine($"rewriteproxy: config: {line}");
        options = read;
        return read is not null;
    }
}
