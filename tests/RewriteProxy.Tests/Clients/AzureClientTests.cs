using System.Text;
using System.Text.Json.Nodes;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Clients;

/// <summary>
/// Azure OpenAI as its apps call it: the `openai` npm package's AzureOpenAI client, with an api-key, a deployment and an
/// api-version, its endpoint set to the proxy (a lane's root, or the proxy's own root for passthrough), and the proxy's
/// Upstream:BaseUrl set to the resource root.
/// </summary>
public sealed class AzureClientTests : UpstreamAndProxy
{
    const string Question = "Which documents prove a change of address?";
    const string Paraphrase = "Which documents can prove a change of address?";
    const string ApiVersion = "2024-10-21";

    static string Draft(string question) => "A draft answer: " + question.TrimEnd('?') + ", such as a utility bill or a lease.";

    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?>
    {
        ["Upstream:BaseUrl"] = Upstream.Root.ToString(),
        ["Lanes:draft:MaxDrift"] = "2",
    };

    protected override void Script(ScriptedUpstream upstream) => upstream.Handler = ProviderAnswers.Handler(Draft);

    JsonObject Spec(string deployment, string apiVersion, params JsonObject[] calls) => new()
    {
        ["client"] = "azure",
        ["endpoint"] = new Uri(Proxy.Root, "lane/draft").ToString().TrimEnd('/'),
        ["apiKey"] = "azure-key-tenant-a",
        ["deployment"] = deployment,
        ["apiVersion"] = apiVersion,
        ["calls"] = new JsonArray(calls),
    };

    static JsonObject Call(string api, string question, bool stream) =>
        new() { ["api"] = api, ["question"] = question, ["stream"] = stream, ["model"] = "gpt-for-rewrites" };

    [Fact]
    public async Task Deployment_chat_completions_are_a_lane_with_the_deployment_and_api_version_in_the_scope()
    {
        var first = await NodeClients.RunAsync("openai-calls.mjs", Spec("rag-expander", ApiVersion,
            Call("chat", Question, false), Call("chat", Question, false), Call("chat", Question, true), Call("chat", Paraphrase, false)));
        var otherDeployment = await NodeClients.RunAsync("openai-calls.mjs", Spec("rag-expander-2", ApiVersion, Call("chat", Question, false)));
        var otherVersion = await NodeClients.RunAsync("openai-calls.mjs", Spec("rag-expander", "2025-04-01-preview", Call("chat", Question, false)));

        // Checked with the openai npm client's AzureOpenAI (version in tests/clients/package.json).
        Assert.Equal(["miss", "hit-exact", "hit-exact", "hit-semantic"],
            first.Select(r => r!["headers"]?["x-rewrite-cache"]?.GetValue<string>() ?? r!["error"]!.GetValue<string>()));
        Assert.All(first, r => Assert.Equal(Draft(Question), r!["text"]!.GetValue<string>()));
        Assert.Equal("miss", otherDeployment[0]!["headers"]!["x-rewrite-cache"]!.GetValue<string>());
        Assert.Equal("miss", otherVersion[0]!["headers"]!["x-rewrite-cache"]!.GetValue<string>());

        var calls = Upstream.Requests.Where(r => r.Path.EndsWith("/chat/completions", StringComparison.Ordinal)).ToList();
        Assert.Equal(3, calls.Count);
        Assert.Equal("/openai/deployments/rag-expander/chat/completions", calls[0].Path);
        Assert.Equal($"?api-version={ApiVersion}", calls[0].QueryString);
        Assert.Equal("azure-key-tenant-a", calls[0].Headers["api-key"]);
        Assert.Equal("/openai/deployments/rag-expander-2/chat/completions", calls[1].Path);
    }

    [Fact]
    public async Task The_azure_responses_path_is_a_lane_too()
    {
        var results = await NodeClients.RunAsync("openai-calls.mjs", Spec("rag-expander", "2025-04-01-preview",
            Call("responses", Question, false), Call("responses", Question, true)));

        Assert.Equal(["miss", "hit-exact"], results.Select(r => r!["headers"]?["x-rewrite-cache"]?.GetValue<string>() ?? r!["error"]!.GetValue<string>()));
        Assert.All(results, r => Assert.Equal(Draft(Question), r!["text"]!.GetValue<string>()));
        Assert.Equal("/openai/responses", Upstream.Requests.Single(r => r.Path.EndsWith("/responses", StringComparison.Ordinal)).Path);
    }

    [Fact]
    public async Task Other_azure_calls_pass_through_untouched_to_the_resource()
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, $"/openai/deployments/embedder/embeddings?api-version={ApiVersion}")
        {
            Content = new StringContent("{\"input\":\"some text\"}", Encoding.UTF8, "application/json"),
        };
        request.Headers.Add("api-key", "azure-key-tenant-a");
        using var response = await Proxy.Client.SendAsync(request);

        Assert.Equal(200, (int)response.StatusCode);
        var seen = Upstream.Requests.Single();
        Assert.Equal("/openai/deployments/embedder/embeddings", seen.Path);
        Assert.Equal($"?api-version={ApiVersion}", seen.QueryString);
        Assert.Equal("{\"input\":\"some text\"}", seen.BodyText);
        Assert.Equal("azure-key-tenant-a", seen.Headers["api-key"]);
    }
}
