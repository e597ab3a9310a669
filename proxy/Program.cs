using RewriteProxy.Cli;

return await RootCommandFactory.Create().Parse(args).InvokeAsync();
