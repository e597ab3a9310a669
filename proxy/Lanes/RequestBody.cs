using Microsoft.AspNetCore.Http;
using RewriteProxy.Wire;

namespace RewriteProxy.Lanes;

/// <summary>Reads a lane call's body into memory, bounded by <c>Limits:MaxRequestBytes</c>.</summary>
public static class RequestBody
{
    const int ChunkBytes = 16 * 1024;

    /// <summary>The body; null when it was refused, and then the 413 or 400 is already written.</summary>
    public static async Task<byte[]?> ReadAsync(HttpContext context, long max, IWireFormat format)
    {
        if (context.Request.ContentLength > max)
        {
            await TooLargeAsync(context, max, format);
            return null;
        }
        using var buffer = new MemoryStream();
        var chunk = new byte[ChunkBytes];
        int read;
        try
        {
            // Counted as it arrives: a chunked body has no length to check up front.
            while ((read = await context.Request.Body.ReadAsync(chunk, context.RequestAborted)) > 0)
            {
                if (buffer.Length + read > max)
                {
                    await TooLargeAsync(context, max, format);
                    return null;
                }
                buffer.Write(chunk, 0, read);
            }
        }
        catch (Exception e) when (e is IOException or BadHttpRequestException)
        {
            await format.WriteErrorAsync(context, 400, "The request body could not be read.", "invalid_request_error", "bad_request_body");
            return null;
        }
        return buffer.ToArray();
    }

    static Task TooLargeAsync(HttpContext context, long max, IWireFormat format) => format.WriteErrorAsync(context, 413,
        $"The request body is larger than Limits:MaxRequestBytes ({max} bytes).", "invalid_request_error", "request_too_large");
}
