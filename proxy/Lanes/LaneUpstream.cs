using System.Diagnostics;
using System.Net.Http.Headers;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Forwarding;
using RewriteProxy.Telemetry;

namespace RewriteProxy.Lanes;

/// <summary>What the upstream answered to a lane miss: a status with headers and body, or a failure to answer at all.</summary>
public sealed record UpstreamAnswer(int Status, IReadOnlyList<KeyValuePair<string, string[]>> Headers, byte[] Body, string? Failure)
{
    public bool Succeeded => Failure is null && Status is >= 200 and < 300;
}

/// <summary>
/// Makes the upstream call of a lane miss: the client's headers (credentials included, hop-by-hop ones not), a
/// non-streamed body, Upstream:Timeout for the whole answer and Limits:MaxResponseBytes for its size.
/// </summary>
public sealed class LaneUpstream(HttpMessageInvoker client, RewriteProxyOptions options)
{
    readonly string _base = options.Upstream.BaseUrl.AbsoluteUri.TrimEnd('/');

    /// <summary>Client headers that never go upstream on a lane call: hop-by-hop (RFC 9110 §7.6.1), framing, ours.</summary>
    static readonly HashSet<string> NotForwarded = new(StringComparer.OrdinalIgnoreCase)
    {
        "Connection", "Keep-Alive", "Proxy-Connection", "Proxy-Authorization", "Proxy-Authenticate", "TE", "Trailer",
        "Transfer-Encoding", "Upgrade", "Host", "Content-Length", "Content-Type", "Accept-Encoding", "Cache-Control",
        "Expect", "X-Rewrite-Lane",
    };

    static readonly HashSet<string> NotRelayed = new(StringComparer.OrdinalIgnoreCase)
    {
        "Connection", "Keep-Alive", "Proxy-Connection", "Transfer-Encoding", "Upgrade", "Trailer", "Content-Length",
        "Content-Encoding", "Server", "Date",
    };

    /// <param name="clientHeaders">The lane call's request headers.</param>
    /// <param name="endpoint">Where the call goes below Upstream:BaseUrl: the lane call's own path and query.</param>
    /// <param name="body">What the wire format sends upstream.</param>
    /// <param name="lane">The lane's name, for the duration metric.</param>
    /// <param name="stopping">The application's shutdown: a coalesced call outlives the caller that started it.</param>
    public async Task<UpstreamAnswer> CallAsync(IHeaderDictionary clientHeaders, LaneEndpoint endpoint, byte[] body, string lane, CancellationToken stopping)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, new Uri(_base + endpoint.UpstreamPath + endpoint.Query.Value));
        var named = new HashSet<string>(HopByHop.NamedByConnection(clientHeaders.Connection), StringComparer.OrdinalIgnoreCase);
        foreach (var (name, values) in clientHeaders)
        {
            if (NotForwarded.Contains(name) || named.Contains(name) || name.StartsWith("X-Rewrite-", StringComparison.OrdinalIgnoreCase)) continue;
            request.Headers.TryAddWithoutValidation(name, (IEnumerable<string>)values!);
        }
        request.Content = new ByteArrayContent(body);
        request.Content.Headers.ContentType = new MediaTypeHeaderValue("application/json");

        using var timeout = CancellationTokenSource.CreateLinkedTokenSource(stopping);
        timeout.CancelAfter(options.Upstream.Timeout);
        var start = Stopwatch.GetTimestamp();
        var code = "error";
        try
        {
            using var response = await client.SendAsync(request, timeout.Token);
            code = ((int)response.StatusCode).ToString();
            var bytes = await ReadBoundedAsync(response.Content, options.Limits.MaxResponseBytes, timeout.Token);
            if (bytes is null)
            {
                code = "too_large";
                return new UpstreamAnswer(502, [], [], $"the upstream answer is larger than Limits:MaxResponseBytes ({options.Limits.MaxResponseBytes} bytes)");
            }
            var headers = response.Headers.Concat(response.Content.Headers)
                .Where(h => !NotRelayed.Contains(h.Key))
                .Select(h => KeyValuePair.Create(h.Key, h.Value.ToArray()))
                .ToList();
            return new UpstreamAnswer((int)response.StatusCode, headers, bytes, null);
        }
        catch (OperationCanceledException) when (!stopping.IsCancellationRequested)
        {
            code = "timeout";
            return new UpstreamAnswer(504, [], [], "timeout");
        }
        catch (HttpRequestException e)
        {
            code = "error";
            return new UpstreamAnswer(502, [], [], e.Message);
        }
        catch (IOException e)
        {
            code = "error";
            return new UpstreamAnswer(502, [], [], e.Message);
        }
        finally
        {
            ProxyMetrics.UpstreamDuration.WithLabels(lane, code).Observe(Stopwatch.GetElapsedTime(start).TotalSeconds);
        }
    }

    static async Task<byte[]?> ReadBoundedAsync(HttpContent content, long max, CancellationToken cancel)
    {
        if (content.Headers.ContentLength > max) return null;
        await using var stream = await content.ReadAsStreamAsync(cancel);
        using var buffer = new MemoryStream();
        var chunk = new byte[16 * 1024];
        int read;
        while ((read = await stream.ReadAsync(chunk, cancel)) > 0)
        {
            if (buffer.Length + read > max) return null;
            buffer.Write(chunk, 0, read);
        }
        return buffer.ToArray();
    }
}
