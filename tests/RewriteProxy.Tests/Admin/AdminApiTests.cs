using System.Net;
using System.Net.Http.Headers;
using System.Net.Http.Json;
using System.Text.Json.Nodes;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Admin;

public sealed class AdminApiTests : UpstreamAndProxy
{
    const string Token = "admin-token-for-tests-0123456789";

    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?>
    {
        ["Admin:Token"] = Token,
        ["Lanes:draft:MaxDrift"] = "0.9",
    };

    protected override void Script(ScriptedUpstream upstream)
    {
        upstream.Completion = r => ScriptedUpstream.LastUserText(r).Contains("garden")
            ? "Which bin takes garden waste?\nHow often is garden waste collected in winter?"
            : ScriptedUpstream.DraftAnswer(r);
    }

    HttpRequestMessage Admin(HttpMethod method, string path, string? token = Token)
    {
        var request = new HttpRequestMessage(method, path);
        if (token is not null) request.Headers.Authorization = new AuthenticationHeaderValue("Bearer", token);
        return request;
    }

    [Theory]
    [InlineData(null)]
    [InlineData("wrong-token-wrong-token-wrong")]
    [InlineData("admin-token-for-tests-012345678")]
    public async Task No_or_wrong_token_is_401(string? token)
    {
        using var response = await Proxy.Client.SendAsync(Admin(HttpMethod.Get, "/admin/stats", token));
        Assert.Equal(HttpStatusCode.Unauthorized, response.StatusCode);
        Assert.Equal("Bearer", response.Headers.WwwAuthenticate.Single().Scheme);
    }

    [Fact]
    public async Task Without_a_configured_token_the_admin_api_is_off()
    {
        await using var proxy = await StartProxyAsync();
        using var response = await proxy.Client.SendAsync(Admin(HttpMethod.Get, "/admin/stats"));
        Assert.Equal(HttpStatusCode.NotFound, response.StatusCode);
    }

    [Fact]
    public async Task Stats_list_delete_and_purge_work_on_the_running_cache()
    {
        await Proxy.AskAsync("draft", "Where is the bottle bank?");
        await Proxy.AskAsync("draft", "Where is the bottle bank?");
        await Proxy.AskAsync("draft", "Who collects garden waste?");
        await Proxy.AskAsync("siblings", "Who collects garden waste?");
        await Proxy.Services.GetRequiredService<RewriteProxy.Store.IRewriteStore>().FlushAsync(CancellationToken.None);

        using var stats = await Proxy.Client.SendAsync(Admin(HttpMethod.Get, "/admin/stats"));
        var lanes = (await stats.Content.ReadFromJsonAsync<JsonObject>())!["lanes"]!.AsArray();
        var draft = lanes.Single(l => l!["lane"]!.GetValue<string>() == "draft")!;
        Assert.Equal(2, draft["entries"]!.GetValue<long>());
        Assert.Equal(1, draft["hitExact"]!.GetValue<long>());
        Assert.Equal(2, draft["miss"]!.GetValue<long>());
        Assert.Equal(1.0 / 3, draft["hitRatio"]!.GetValue<double>(), 9);

        using var listed = await Proxy.Client.SendAsync(Admin(HttpMethod.Get, "/admin/entries?lane=draft&q=bottle"));
        var entries = (await listed.Content.ReadFromJsonAsync<JsonObject>())!["entries"]!.AsArray();
        var id = entries.Single()!["id"]!.GetValue<long>();
        Assert.Equal("Where is the bottle bank?", entries.Single()!["question"]!.GetValue<string>());

        using var deleted = await Proxy.Client.SendAsync(Admin(HttpMethod.Delete, $"/admin/entries/{id}"));
        Assert.Equal(HttpStatusCode.NoContent, deleted.StatusCode);
        Assert.Equal("miss", (await Proxy.AskAsync("draft", "Where is the bottle bank?")).Cache);

        var purge = Admin(HttpMethod.Post, "/admin/purge");
        purge.Content = JsonContent.Create(new { lane = "siblings" });
        using var purged = await Proxy.Client.SendAsync(purge);
        Assert.Equal(1, (await purged.Content.ReadFromJsonAsync<JsonObject>())!["deleted"]!.GetValue<int>());
        Assert.Equal("miss", (await Proxy.AskAsync("siblings", "Who collects garden waste?")).Cache);
    }

    [Fact]
    public async Task A_purge_without_a_filter_is_refused()
    {
        var purge = Admin(HttpMethod.Post, "/admin/purge");
        purge.Content = JsonContent.Create(new { });
        using var response = await Proxy.Client.SendAsync(purge);
        Assert.Equal(HttpStatusCode.BadRequest, response.StatusCode);
    }
}
