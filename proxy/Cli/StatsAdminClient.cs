using System.Net.Http.Headers;
using System.Net.Http.Json;
using System.Text.Json;
using System.Text.Json.Nodes;

namespace RewriteProxy.Cli;

/// <summary>The CLI side of a running proxy's <c>/admin</c> API (bearer <c>Admin:Token</c>), for stats and purge.</summary>
public sealed class AdminClient(Uri root, string token, HttpMessageHandler? handler = null) : IDisposable
{
    /// <summary>An admin call counts rows or deletes in one transaction; half a minute is ample and still ends a hung call.</summary>
    static readonly TimeSpan Timeout = TimeSpan.FromSeconds(30);

    readonly HttpClient _http = new(handler ?? new HttpClientHandler()) { BaseAddress = root, Timeout = Timeout };

    /// <summary><c>GET /admin/stats</c>: the same JSON the store's stats give (see AdminEndpoints.StatsBody).</summary>
    public async Task<JsonNode> StatsAsync(CancellationToken cancel) =>
        JsonNode.Parse(await SendAsync(new HttpRequestMessage(HttpMethod.Get, "admin/stats"), cancel))
        ?? throw new AdminCallException("GET /admin/stats answered an empty body");

    /// <summary><c>POST /admin/purge</c>; returns how many entries went.</summary>
    public async Task<long> PurgeAsync(string? lane, string? partition, string? olderThan, CancellationToken cancel)
    {
        var request = new HttpRequestMessage(HttpMethod.Post, "admin/purge")
        {
            Content = JsonContent.Create(new { lane, partition, olderThan }),
        };
        var body = JsonNode.Parse(await SendAsync(request, cancel));
        return body?["deleted"]?.GetValue<long>() ?? throw new AdminCallException("POST /admin/purge answered without \"deleted\"");
    }

    async Task<string> SendAsync(HttpRequestMessage request, CancellationToken cancel)
    {
        request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", token);
        HttpResponseMessage response;
        try
        {
            response = await _http.SendAsync(request, cancel);
        }
        catch (HttpRequestException e)
        {
            throw new AdminCallException($"{request.Method} {new Uri(root, request.RequestUri!)}: {e.Message}");
        }
        catch (TaskCanceledException) when (!cancel.IsCancellationRequested)
        {
            throw new AdminCallException($"{request.Method} {new Uri(root, request.RequestUri!)}: no answer within {Timeout.TotalSeconds:0} s");
        }
        using (response)
        {
            var body = await response.Content.ReadAsStringAsync(cancel);
            if (response.IsSuccessStatusCode) return body;
            throw new AdminCallException($"{request.Method} {request.RequestUri}: {(int)response.StatusCode} {ErrorMessage(body)}".TrimEnd());
        }
    }

    /// <summary>The message of an OpenAI-shaped error body, else the body itself (cut short).</summary>
    static string ErrorMessage(string body)
    {
        try
        {
            if (JsonNode.Parse(body)?["error"]?["message"]?.GetValue<string>() is { } m) return m;
        }
        catch (JsonException) { }
        return body.Length > 200 ? body[..200] : body;
    }

    public void Dispose() => _http.Dispose();
}

/// <summary>An admin call that failed: the proxy did not answer, refused the token, or the store was down. One line for the operator.</summary>
public sealed class AdminCallException(string message) : Exception(message);
