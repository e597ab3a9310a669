using Prometheus;

namespace RewriteProxy.Telemetry;

/// <summary>Series about finding the question in templated prompts and about never-empty answers.</summary>
public static class QuestionMetrics
{
    /// <summary>Creates the series at zero for every lane (see <see cref="ProxyMetrics.Declare"/>).</summary>
    public static void Declare(IEnumerable<RewriteProxy.Lanes.LaneOptions> lanes)
    {
        foreach (var lane in lanes)
        {
            Unlocated.WithLabels(lane.Name);
            TemplatesLearned.WithLabels(lane.Name);
            Fallbacks.WithLabels(lane.Name);
        }
    }

    public static readonly Counter Unlocated = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_question_unlocated_total",
        "Lane calls whose question was not located with confidence: exact caching only, no semantic lookup, drift only observed.",
        new CounterConfiguration { LabelNames = ["lane"] });

    public static readonly Counter TemplatesLearned = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_templates_learned_total", "Prompt templates learned from traffic.",
        new CounterConfiguration { LabelNames = ["lane"] });

    public static readonly Counter Fallbacks = Prometheus.Metrics.CreateCounter(
        "rewriteproxy_fallback_total",
        "Lane answers in which the question stood in for rewrites the drift guard dropped (every sibling, or a draft after its retries); never cached.",
        new CounterConfiguration { LabelNames = ["lane"] });
}
