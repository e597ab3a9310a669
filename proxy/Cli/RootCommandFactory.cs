using System.CommandLine;

namespace RewriteProxy.Cli;

public static class RootCommandFactory
{
    public static RootCommand Create()
    {
        var root = new RootCommand(
            "RewriteProxy: a reverse proxy between a RAG app and its LLM provider that caches query-expansion rewrites " +
            "(answer drafts, sibling questions) by semantic similarity, drops rewrites that drift off the question, and " +
            "exports Prometheus metrics. Settings: config/rewriteproxy.json, then REWRITEPROXY_* environment variables, " +
            "then --Section:Key=value arguments.");
        root.Options.Add(Startup.ConfigFile);
        root.Subcommands.Add(ServeCommand.Create());
        root.Subcommands.Add(HealthCommand.Create());
        root.Subcommands.Add(DemoCommand.Create());
        root.Subcommands.Add(TuneCommand.Create());
        root.Subcommands.Add(StatsCommand.Create());
        root.Subcommands.Add(PurgeCommand.Create());
        // No command = serve.
        root.Options.Add(ServeCommand.Urls);
        root.TreatUnmatchedTokensAsErrors = false;
        root.SetAction(ServeCommand.RunAsync);
        return root;
    }
}
