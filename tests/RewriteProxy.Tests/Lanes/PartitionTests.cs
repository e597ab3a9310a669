using System.Text;
using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Hosting;
using RewriteProxy.Lanes;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// Tenants kept apart whatever header carries their credential: Authorization (OpenAI), api-key (Azure OpenAI),
/// x-api-key (Anthropic and several OpenAI-compatible hosts) and headers an operator lists in PartitionHeaders.
/// </summary>
public sealed class PartitionTests : UpstreamAndProxy
{
    protected override IDictionary<string, string?> Settings => new Dictionary<string, string?>
    {
        ["Lanes:draft:MaxDrift"] = "2",
        ["PartitionHeaders:0"] = "X-Tenant-Id",
    };

    /// <summary>The upstream writes the credential headers it saw into its answer, so a served answer shows whose it was.</summary>
    protected override void Script(ScriptedUpstream upstream) => upstream.Handler = async (context, recorded) =>
    {
        var seen = string.Join(",", new[] { "Authorization", "api-key", "x-api-key", "X-Tenant-Id" }
            .Select(h => recorded.Headers.GetValueOrDefault(h) ?? "-"));
        await context.Response.WriteAsJsonAsync(ScriptedUpstream.Completed("scripted-model",
            $"A draft answer: {ScriptedUpstream.LastUserText(recorded.Json!)} [{seen}]"));
    };

    static async Task<LaneReply> AskAsync(TestProxy proxy, string question, params (string Name, string Value)[] headers)
    {
        using var request = new HttpRequestMessage(HttpMethod.Post, "/lane/draft/v1/chat/completions")
        {
            Content = new StringContent(LaneCalls.Request(question).ToJsonString(), Encoding.UTF8, "application/json"),
        };
        foreach (var (name, value) in headers) request.Headers.TryAddWithoutValidation(name, value);
        var response = await proxy.Client.SendAsync(request);
        return new LaneReply(response, await response.Content.ReadAsStringAsync());
    }

    [Fact]
    public async Task A_second_tenant_with_another_api_key_or_x_api_key_is_a_miss_not_the_first_tenants_entry()
    {
        const string question = "How many guest passes does a family membership include?";

        var first = await AskAsync(Proxy, question, ("api-key", "tenant-one-key"));
        var second = await AskAsync(Proxy, question, ("api-key", "tenant-two-key"));
        var third = await AskAsync(Proxy, question, ("x-api-key", "tenant-three-key"));
        var again = await AskAsync(Proxy, question, ("api-key", "tenant-one-key"));

        Assert.Equal("miss", first.Cache);
        Assert.Equal("miss", second.Cache);
        Assert.Equal("miss", third.Cache);
        Assert.Contains("tenant-two-key", second.Content);
        Assert.Contains("tenant-three-key", third.Content);
        Assert.Equal("hit-exact", again.Cache);
        Assert.Contains("tenant-one-key", again.Content);
        Assert.Equal(3, Upstream.ChatCalls);
    }

    public static TheoryData<string, string> Schemes => new()
    {
        { "Authorization", "Bearer " },
        { "api-key", "" },
        { "x-api-key", "" },
        { "X-Tenant-Id", "" },
    };

    [Theory]
    [MemberData(nameof(Schemes))]
    public async Task Two_tenants_of_one_scheme_asking_the_same_questions_at_once_never_get_each_others_answers(string header, string prefix)
    {
        string[] tenants = [$"{prefix}key-alpha-{Guid.NewGuid():N}", $"{prefix}key-beta-{Guid.NewGuid():N}"];
        string[] questions =
        [
            "When does the indoor climbing wall close on Sundays?", "Can I freeze my membership while travelling?",
            "Is there a student discount on the annual plan?", "How do I book a personal trainer session?",
        ];
        for (var round = 0; round < 2; round++) // round 0: misses at once; round 1: hits at once
        {
            var calls = tenants.SelectMany(t => questions.Select(q => (Tenant: t, Question: q))).ToArray();
            Random.Shared.Shuffle(calls);
            var replies = await Task.WhenAll(calls.Select(async c => (c.Tenant, Reply: await AskAsync(Proxy, c.Question, (header, c.Tenant)))));
            foreach (var (tenant, reply) in replies)
            {
                Assert.Equal(200, reply.Status);
                Assert.Contains(tenant, reply.Content);
                Assert.DoesNotContain(tenants.Single(t => t != tenant), reply.Content);
                Assert.Equal(round == 0 ? "miss" : "hit-exact", reply.Cache);
            }
        }
        Assert.Equal(tenants.Length * questions.Length, Upstream.ChatCalls);
    }

    [Fact]
    public async Task Callers_without_any_credential_share_the_anonymous_partition_and_never_a_tenants()
    {
        const string question = "Which lockers can be rented by the month?";

        var tenant = await AskAsync(Proxy, question, ("x-api-key", "tenant-key-1"));
        var anonymous = await AskAsync(Proxy, question);
        var anonymousAgain = await AskAsync(Proxy, question);

        Assert.Equal("miss", tenant.Cache);
        Assert.Equal("miss", anonymous.Cache);
        Assert.DoesNotContain("tenant-key-1", anonymous.Content);
        Assert.Equal("hit-exact", anonymousAgain.Cache);
    }

    static IHeaderDictionary Headers(params (string Name, string Value)[] headers)
    {
        var dictionary = new HeaderDictionary();
        foreach (var (name, value) in headers) dictionary.Append(name, value);
        return dictionary;
    }

    static readonly PartitionOptions Default = new();

    [Fact]
    public void The_partition_is_the_same_whatever_order_or_letter_case_the_headers_arrive_in()
    {
        var a = PartitionKey.Of(Default, Headers(("api-key", "k1"), ("Authorization", "Bearer t1")));
        var b = PartitionKey.Of(Default, Headers(("authorization", "Bearer t1"), ("API-KEY", "k1")));

        Assert.Equal(a, b);
        Assert.Matches("^[0-9a-f]{64}$", a);
    }

    [Fact]
    public void The_header_name_is_part_of_the_partition_so_one_value_under_two_names_is_two_tenants()
    {
        Assert.NotEqual(PartitionKey.Of(Default, Headers(("api-key", "same-value"))),
            PartitionKey.Of(Default, Headers(("x-api-key", "same-value"))));
    }

    [Fact]
    public void Every_credential_header_changes_the_partition()
    {
        var options = new PartitionOptions { Headers = ["X-Tenant-Id"] };
        var baseline = PartitionKey.Of(options, Headers(("Authorization", "Bearer t1")));
        foreach (var extra in new[] { "api-key", "x-api-key", "X-Tenant-Id" })
            Assert.NotEqual(baseline, PartitionKey.Of(options, Headers(("Authorization", "Bearer t1"), (extra, "v"))));
        // A header that is not a credential (nor listed) leaves it alone.
        Assert.Equal(baseline, PartitionKey.Of(options, Headers(("Authorization", "Bearer t1"), ("User-Agent", "app/1.0"))));
    }

    [Fact]
    public void Values_cannot_be_shifted_between_headers_to_collide()
    {
        // Length-prefixed pairs: "a" + "bc" is not "ab" + "c".
        Assert.NotEqual(PartitionKey.Of(Default, Headers(("api-key", "a"), ("x-api-key", "bc"))),
            PartitionKey.Of(Default, Headers(("api-key", "ab"), ("x-api-key", "c"))));
    }

    [Fact]
    public void No_credential_is_the_anonymous_partition_and_shared_mode_is_one_partition()
    {
        Assert.Equal(PartitionKey.Anonymous, PartitionKey.Of(Default, Headers()));
        Assert.Equal(PartitionKey.Anonymous, PartitionKey.Of(Default, Headers(("Authorization", ""))));
        var shared = new PartitionOptions { Mode = PartitionMode.Shared };
        Assert.Equal(PartitionKey.Shared, PartitionKey.Of(shared, Headers(("api-key", "k1"))));
        Assert.Equal(PartitionKey.Shared, PartitionKey.Of(shared, Headers(("api-key", "k2"))));
    }
}
