using System.CommandLine;
using RewriteProxy.Store;

namespace RewriteProxy.Cli;

/// <summary>Where stats and purge act: the configured store directly (opened through the store factory), or a running proxy through its admin API.</summary>
public sealed record StatsTarget(StoreOptions? Store, Uri? Url, string? Token)
{
    /// <summary>The --store, --url and --token options; each command gets its own instances.</summary>
    public sealed class Options
    {
        public readonly Option<string?> Store = new("--store") { Description = "The store's file; overrides Store:Path of the configuration." };
        public readonly Option<string?> Url = new("--url") { Description = "A running proxy, e.g. http://127.0.0.1:8080 (uses /admin)." };
        public readonly Option<string?> Token = new("--token") { Description = "Admin:Token of the proxy at --url (bearer)." };

        public void AddTo(Command command)
        {
            command.Options.Add(Store);
            command.Options.Add(Url);
            command.Options.Add(Token);
        }

        /// <summary>The target, or null after printing why not (both --store and --url, --url without --token, bad config).</summary>
        public StatsTarget? Resolve(ParseResult parse, string commandName)
        {
            var store = parse.GetValue(Store);
            var urlText = parse.GetValue(Url);
            var token = parse.GetValue(Token);
            if (store is not null && urlText is not null) return Fail(commandName, "give --store or --url, not both");
            if (urlText is not null)
            {
                // Parsed here rather than by the option, so a bad URL is one line on stderr and not a parser exception.
                if (!Uri.TryCreate(urlText, UriKind.Absolute, out var url) || url.Scheme is not ("http" or "https"))
                    return Fail(commandName, $"--url {urlText}: use an absolute http(s) URL such as http://127.0.0.1:8080");
                if (string.IsNullOrEmpty(token)) return Fail(commandName, "--url needs --token (the proxy's Admin:Token)");
                return new StatsTarget(null, url, token);
            }
            if (token is not null) return Fail(commandName, "--token goes with --url");
            // --store is a Store:Path alone: it needs no configuration file.
            if (store is not null) return new StatsTarget(new StoreOptions { Path = store }, null, null);
            if (!Startup.TryLoad(parse, out var options, out _)) return null;
            return new StatsTarget(options.Store, null, null);
        }

        static StatsTarget? Fail(string commandName, string why)
        {
            Console.Error.WriteLine($"rewriteproxy: {commandName}: {why}");
            return null;
        }
    }

    /// <summary>What the figures are read from, for the console: the proxy's URL or the store's settings.</summary>
    public string Describe() => Url?.ToString() ?? StoreFactory.Describe(Store!);

    /// <summary>The admin root with a trailing slash, so that "admin/stats" resolves under any path prefix.</summary>
    public Uri AdminRoot => new(Url!.ToString().EndsWith('/') ? Url.ToString() : Url + "/");
}
