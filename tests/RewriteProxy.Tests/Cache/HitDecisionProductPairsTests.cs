using RewriteProxy.Cache;
using RewriteProxy.Cli.Demo;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// The paraphrases the product's own workloads count on (the demo scenario, the metrics workload) are served by the
/// hit decision, and the demo's near-misses are refused: one place that says so, whatever test drives them over HTTP.
/// </summary>
public sealed class HitDecisionProductPairsTests
{
    static readonly HitDecision Decision = new(new AnchorGuard());

    public static TheoryData<string, string> DemoParaphrases()
    {
        var data = new TheoryData<string, string>();
        foreach (var q in DemoScenario.Questions)
            foreach (var p in q.Paraphrases) data.Add(p, q.Question);
        // tests/RewriteProxy.Tests/Telemetry/MetricsWorkload.cs
        data.Add("At what time does the first ferry depart from Marrow Island harbour?", "What time does the first ferry leave Marrow Island harbour?");
        data.Add("Is the ferry to Marrow Island accessible for wheelchairs?", "Is the Marrow Island ferry wheelchair accessible?");
        data.Add("Are dogs permitted on the Marrow Island ferry?", "Are dogs allowed on the Marrow Island ferry?");
        return data;
    }

    public static TheoryData<string, string> DemoNearMisses()
    {
        var data = new TheoryData<string, string>();
        foreach (var q in DemoScenario.Questions)
            if (q.NearMiss is { } n) data.Add(n.Text, q.Question);
        return data;
    }

    [Theory]
    [MemberData(nameof(DemoParaphrases))]
    public void Workload_paraphrase_is_served(string asked, string cached) =>
        Assert.True(Decision.Decide(asked, cached, 0.9).Agree, Decision.Decide(asked, cached, 0.9).ToString());

    [Theory]
    [MemberData(nameof(DemoNearMisses))]
    public void Demo_near_miss_is_refused(string asked, string cached) => Assert.False(Decision.Decide(asked, cached, 0.9).Agree);
}
