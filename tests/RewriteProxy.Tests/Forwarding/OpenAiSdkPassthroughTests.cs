using System.ClientModel;
using OpenAI;
using OpenAI.Chat;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Forwarding;

/// <summary>
/// Wire compatibility with a client written by others: the official OpenAI .NET SDK (NuGet OpenAI 2.15.0),
/// pointed at the proxy by its base URL alone.
/// </summary>
public sealed class OpenAiSdkPassthroughTests : UpstreamAndProxy
{
    ChatClient Client() => new("scripted-model", new ApiKeyCredential("sk-sdk-test"),
        new OpenAIClientOptions { Endpoint = new Uri(Proxy.Root, "v1") });

    [Fact]
    public async Task Sdk_chat_completion_passes_through()
    {
        ChatCompletion completion = await Client().CompleteChatAsync([new UserChatMessage("Where is the depot?")]);

        Assert.Equal("answer to: Where is the depot?", completion.Content.Single().Text);
        Assert.Equal(ChatFinishReason.Stop, completion.FinishReason);
        var seen = Upstream.Requests.Single();
        Assert.Equal("/v1/chat/completions", seen.Path);
        Assert.Equal("Bearer sk-sdk-test", seen.Headers["Authorization"]);
    }

    [Fact]
    public async Task Sdk_streaming_chat_completion_passes_through()
    {
        var text = new System.Text.StringBuilder();
        var updates = 0;
        await foreach (var update in Client().CompleteChatStreamingAsync([new UserChatMessage("When does the pool open on Sundays?")]))
        {
            updates++;
            foreach (var part in update.ContentUpdate) text.Append(part.Text);
        }
        Assert.Equal("answer to: When does the pool open on Sundays?", text.ToString());
        Assert.True(updates > 3, $"expected several streamed updates, got {updates}");
    }
}
