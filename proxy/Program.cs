using RewriteProxy.Cli;
using RewriteProxy.Telemetry;

DefaultMetrics.UseLintClean();

return await RootCommandFactory.Create().Parse(args).InvokeAsync();
