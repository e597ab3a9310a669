using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Logging;
using RewriteProxy.Hosting;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Hosting;

/// <summary>
/// The request log's levels: lane calls (they carry X-Rewrite-Cache) and answers of 400 or above at Information,
/// successful passthrough calls at Debug; never the query string.
/// </summary>
public sealed class RequestLogTests
{
    static async Task<string> LogOf(int status, string? cache, string path = "/v1/models", string query = "")
    {
        var logger = new ListLogger();
        var log = new RequestLog(context =>
        {
            context.Response.StatusCode = status;
            if (cache is not null) context.Response.Headers["X-Rewrite-Cache"] = cache;
            return Task.CompletedTask;
        }, new TypedLogger(logger));
        var context = new DefaultHttpContext();
        context.Request.Method = "POST";
        context.Request.Path = path;
        context.Request.QueryString = new QueryString(query);
        await log.InvokeAsync(context);
        return Assert.Single(logger.Lines);
    }

    [Fact]
    public async Task A_lane_call_is_logged_at_Information_with_its_cache_result() =>
        Assert.Matches(@"^Information: POST /lane/draft/v1/chat/completions 200 [0-9.]+ ms cache=hit-semantic$",
            await LogOf(200, "hit-semantic", "/lane/draft/v1/chat/completions"));

    [Fact]
    public async Task A_successful_passthrough_call_is_logged_at_Debug() =>
        Assert.StartsWith("Debug: POST /v1/models 200 ", await LogOf(200, null));

    [Theory]
    [InlineData(404)]
    [InlineData(502)]
    public async Task A_passthrough_call_answered_with_an_error_is_logged_at_Information(int status) =>
        Assert.StartsWith($"Information: POST /v1/models {status} ", await LogOf(status, null));

    [Fact]
    public async Task The_query_string_is_never_logged() =>
        Assert.DoesNotContain("api-key", await LogOf(502, null, "/openai/deployments/d/chat/completions", "?api-key=secret"));

    sealed class TypedLogger(ILogger inner) : ILogger<RequestLog>
    {
        public IDisposable? BeginScope<TState>(TState state) where TState : notnull => inner.BeginScope(state);
        public bool IsEnabled(LogLevel logLevel) => inner.IsEnabled(logLevel);
        public void Log<TState>(LogLevel logLevel, EventId eventId, TState state, Exception? exception, Func<TState, Exception?, string> formatter) =>
            inner.Log(logLevel, eventId, state, exception, formatter);
    }
}
