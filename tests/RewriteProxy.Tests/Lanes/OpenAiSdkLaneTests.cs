using System.ClientModel;
using System.Text;
using OpenAI;
using OpenAI.Chat;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// Lane hits and misses, JSON and streamed, read by a client written by others: the official OpenAI .NET SDK
/// (NuGet OpenAI 2.15.0), configured with nothing but the lane's base URL.
/// </summary>
public sealed class OpenAiSdkLaneTests : UpstreamAndProxy
{
    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?> { ["Lanes:draft:MaxDrift"] = "0.9" };

    protected override void Script(ScriptedUpstream upstream)
    {
        upstream.Completion = r => "A draft answer: members may borrow twelve books at a time. " + ScriptedUpstream.LastUserText(r);
    }

    ChatClient Client() => new("scripted-model", new ApiKeyCredential("sk-sdk-lane"),
        new OpenAIClientOptions { Endpoint = new Uri(Proxy.Root, "lane/draft/v1") });

    static async Task<(string Text, ChatTokenUsage? Usage)> StreamAsync(ChatClient client, string question)
    {
        var text = new StringBuilder();
        ChatTokenUsage? usage = null;
        var options = new ChatCompletionOptions();
        await foreach (var update in client.CompleteChatStreamingAsync([new UserChatMessage(question)], options))
        {
            foreach (var part in update.ContentUpdate) text.Append(part.Text);
            usage ??= update.Usage;
        }
        return (text.ToString(), usage);
    }

    [Fact]
    public async Task Sdk_reads_a_json_miss_and_a_json_hit()
    {
        var client = Client();
        ChatCompletion miss = await client.CompleteChatAsync([new UserChatMessage("How many books can a member borrow?")]);
        ChatCompletion hit = await client.CompleteChatAsync([new UserChatMessage("How many books can a member borrow?")]);

        Assert.Equal(miss.Content.Single().Text, hit.Content.Single().Text);
        Assert.Equal(ChatFinishReason.Stop, hit.FinishReason);
        Assert.Equal(miss.Usage.TotalTokenCount, hit.Usage.TotalTokenCount);
        Assert.Equal(1, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Sdk_reads_a_streamed_miss_and_a_streamed_hit_with_usage()
    {
        var client = Client();
        var miss = await StreamAsync(client, "Can I renew a loan by phone?");
        var hit = await StreamAsync(client, "Can I renew a loan by phone?");

        Assert.StartsWith("A draft answer:", miss.Text);
        Assert.Equal(miss.Text, hit.Text);
        Assert.Equal(1, Upstream.ChatCalls);
        // The SDK asks for stream_options.include_usage on every streamed call, so the usage chunk must be there, with
        // the miss's own token counts repeated by the hit.
        Assert.NotNull(miss.Usage);
        Assert.NotNull(hit.Usage);
        Assert.Equal(miss.Usage.TotalTokenCount, hit.Usage.TotalTokenCount);
    }
}
