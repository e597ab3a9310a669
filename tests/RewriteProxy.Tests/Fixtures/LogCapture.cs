using System.Collections.Concurrent;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Logging;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>
/// Keeps every log line of a proxy started with <see cref="Register"/> (as the app's logging filters let them through:
/// raise a category's level in the proxy's settings to see its Information lines).
/// </summary>
public sealed class LogCapture : ILoggerProvider
{
    readonly ConcurrentQueue<string> _lines = new();

    public IReadOnlyList<string> Lines => [.. _lines];

    /// <summary>Adds this capture to a proxy's services (TestProxy.StartAsync's overrides).</summary>
    public void Register(IServiceCollection services) => services.AddSingleton<ILoggerProvider>(this);

    public bool Contains(string text) => _lines.Any(l => l.Contains(text, StringComparison.Ordinal));

    public ILogger CreateLogger(string categoryName) => new Logger(this, categoryName);

    public void Dispose() { }

    sealed class Logger(LogCapture capture, string category) : ILogger
    {
        public IDisposable? BeginScope<TState>(TState state) where TState : notnull => null;

        public bool IsEnabled(LogLevel logLevel) => true;

        public void Log<TState>(LogLevel logLevel, EventId eventId, TState state, Exception? exception, Func<TState, Exception?, string> formatter) =>
            capture._lines.Enqueue($"{logLevel} {category}: {formatter(state, exception)}");
    }
}
