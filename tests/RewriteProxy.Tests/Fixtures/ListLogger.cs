using Microsoft.Extensions.Logging;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>A logger that keeps every formatted message (with its exception's text), for tests that read what was logged.</summary>
public sealed class ListLogger : ILogger
{
    readonly List<string> _lines = [];

    public IReadOnlyList<string> Lines
    {
        get
        {
            lock (_lines) return [.. _lines];
        }
    }

    public string Text => string.Join('\n', Lines);

    public IDisposable? BeginScope<TState>(TState state) where TState : notnull => null;

    public bool IsEnabled(LogLevel logLevel) => true;

    public void Log<TState>(LogLevel logLevel, EventId eventId, TState state, Exception? exception, Func<TState, Exception?, string> formatter)
    {
        var line = $"{logLevel}: {formatter(state, exception)}{(exception is null ? "" : " " + exception)}";
        lock (_lines) _lines.Add(line);
    }
}
