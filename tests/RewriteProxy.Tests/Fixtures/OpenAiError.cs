using System.Text.Json;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>The error body shape of the OpenAI API reference: {"error":{"message","type","code"}}.</summary>
public sealed record OpenAiError(string Message, string Type, string Code)
{
    public static async Task<OpenAiError> ReadAsync(HttpResponseMessage response)
    {
        Assert.Equal("application/json", response.Content.Headers.ContentType?.MediaType);
        using var doc = JsonDocument.Parse(await response.Content.ReadAsStringAsync());
        var e = doc.RootElement.GetProperty("error");
        return new OpenAiError(e.GetProperty("message").GetString()!, e.GetProperty("type").GetString()!,
            e.GetProperty("code").GetString()!);
    }
}
