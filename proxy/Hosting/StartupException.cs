namespace RewriteProxy.Hosting;

/// <summary>A start-up failure that the operator can fix (bad model file, unopenable store): printed as one line.</summary>
public sealed class StartupException(string message, Exception? inner = null) : Exception(message, inner);
